"""Output folders under faults: inputs never outputs, one run per folder, a manifest that matches, kills.

The expectations are the issue's own (issue 14): a folder whose run.json
matches its files is one whole run; a clash with an input, a locked folder or
bad input is one line and exit 2; a full or read-only disk one line and exit 3.
Hashes are checked with hashlib, independently of the code under test.
"""

import fcntl
import hashlib
import json
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest

from pvsource.demo import demo_system, synthetic_weather

from conftest import ROOT, demo_system_file, run_cli, write_weather_csv

DAYS = 8


@pytest.fixture(scope="module")
def short_weather():
    return synthetic_weather(demo_system()).iloc[: 24 * DAYS]


@pytest.fixture
def inputs(tmp_path, short_weather):
    return demo_system_file(tmp_path), write_weather_csv(short_weather, tmp_path / "weather.csv")


def sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def assert_consistent(folder: Path):
    """run.json lists exactly the files in the folder, with their true hashes and sizes; no temporary files."""
    manifest = json.loads((folder / "run.json").read_text())
    files = {str(p.relative_to(folder)) for p in folder.rglob("*") if p.is_file()} - {"run.json"}
    assert set(manifest["outputs"]) == files
    for name, rec in manifest["outputs"].items():
        assert rec == {"sha256": sha(folder / name), "bytes": (folder / name).stat().st_size}, name
    return manifest


def test_season_manifest_names_every_input_and_output(capsys, tmp_path, inputs):
    system_file, weather = inputs
    out = tmp_path / "out"
    code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out))
    assert code == 0, err
    manifest = assert_consistent(out)
    assert manifest["command"] == "season" and manifest["options"]["weather_file"] == str(weather)
    assert {(r["kind"], r["path"], r["sha256"]) for r in manifest["inputs"]} == {
        ("system", str(system_file), sha(system_file)), ("weather", str(weather), sha(weather))}
    assert {"steps.parquet", "summary.json", "report.html"} <= set(manifest["outputs"])


def test_the_four_overwrite_cases_are_refused_before_anything_is_written(capsys, tmp_path, inputs):
    # The four cases of issue 14, each with --force: exit 2, one line, the input untouched.
    system_file, weather = inputs
    fl = tmp_path / "fl"
    fl.mkdir()
    (fl / "a.toml").write_bytes(system_file.read_bytes())
    (fl / "a.csv").write_bytes(weather.read_bytes())
    (fl / "fleet.csv").write_text("name,system,weather\na,a.toml,a.csv\n")
    folder = tmp_path / "folder"
    folder.mkdir()
    (folder / "fleet.toml").write_bytes(system_file.read_bytes())
    (folder / "fleet.csv").write_bytes(weather.read_bytes())
    mod = tmp_path / "mod"
    mod.mkdir()
    (mod / "monthly.csv").write_text('[module]\nname = "m"\nv_oc = 40.1\ni_sc = 9.8\nv_mp = 33.0\ni_mp = 9.2\n'
                                     'isc_temp_coeff_pct = 0.05\nvoc_temp_coeff_pct = -0.29\ncells_in_series = 60\n')
    text = system_file.read_text()
    start = text.index("[module]")
    end = text.index("\n[", start + 1)
    (mod / "system.toml").write_text(text[:start] + '[module]\nfile = "monthly.csv"\n' + text[end:])
    ex = tmp_path / "ex"
    ex.mkdir()
    (ex / "results.parquet").write_bytes(weather.read_bytes())
    cases = [
        (fl / "fleet.csv", ["fleet", str(fl / "fleet.csv"), "--out", str(fl), "--force"]),
        (folder / "fleet.csv", ["fleet", str(folder), "--out", str(folder), "--force"]),
        (mod / "monthly.csv", ["season", str(mod / "system.toml"), str(weather), "--out", str(mod), "--force"]),
        (ex / "results.parquet", ["explore", str(system_file), str(ex / "results.parquet"), "--vary", "tilt_deg=20",
                                  "--out", str(ex), "--price-per-kg", "12", "--energy-value", "0.3", "--force"]),
    ]
    for victim, argv in cases:
        before = victim.read_bytes()
        listing = sorted(os.listdir(victim.parent))
        code, _, err = run_cli(capsys, *argv)
        assert code == 2 and "would overwrite the input" in err and str(victim.name) in err, (argv, err)
        assert err.count("\n") == 1 and victim.read_bytes() == before
        assert sorted(os.listdir(victim.parent)) == listing


def test_a_hard_link_to_an_input_is_an_input(capsys, tmp_path, inputs):
    system_file, weather = inputs
    out = tmp_path / "out"
    out.mkdir()
    os.link(weather, out / "steps.csv")
    code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out), "--force")
    assert code == 2 and "would overwrite the input" in err


def test_a_locked_folder_is_refused_and_stale_temporaries_do_not_count(capsys, tmp_path, inputs):
    system_file, weather = inputs
    out = tmp_path / "out"
    out.mkdir()
    stale = [out / ".steps.parquet.k2j4_x9a", out / ".monthly_energy.x8d2k1q0.png"]
    for p in stale:
        p.write_bytes(b"\0" * 1000)
    fd = os.open(out, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)  # another run holds the folder
        code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out), "--force")
        assert code == 2 and "in use by another pvsource run" in err and err.count("\n") == 1
    finally:
        os.close(fd)
    # Only our own stale temporary files: the folder counts as empty, and they go.
    code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out))
    assert code == 0, err
    assert not any(p.exists() for p in stale)
    assert_consistent(out)
    (out / ".notes").write_text("mine")  # not ours: the folder is not empty
    code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out))
    assert code == 2 and "not empty" in err


def test_a_late_input_error_leaves_no_empty_folder(capsys, tmp_path, inputs):
    system_file, weather = inputs
    fl = tmp_path / "fl"
    fl.mkdir()
    for name in ("a", "b"):
        (fl / f"{name}.toml").write_bytes(system_file.read_bytes())
    (fl / "a.csv").write_bytes(weather.read_bytes())
    lines = weather.read_text().splitlines()
    lines[5] = lines[5].replace(lines[5].split(",")[1], "inf", 1)
    (fl / "b.csv").write_text("\n".join(lines) + "\n")  # the second member's weather is bad
    out = tmp_path / "deep" / "out"
    code, _, err = run_cli(capsys, "fleet", str(fl), "--out", str(out))
    assert code == 2 and "b.csv" in err and "row 6" in err
    assert not (tmp_path / "deep").exists()


def test_a_rerun_killed_midway_leaves_no_manifest_beside_mixed_files(capsys, tmp_path, inputs, monkeypatch):
    from pvsource import plots

    system_file, weather = inputs
    out = tmp_path / "out"
    args = ("season", str(system_file), str(weather), "--out", str(out))
    assert run_cli(capsys, *args)[0] == 0

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(plots, "soc_figure", interrupted)
    code, _, _ = run_cli(capsys, *args, "--force")
    assert code == 130
    assert not (out / "run.json").exists()  # new steps beside an old report: not a consistent run
    monkeypatch.undo()
    assert run_cli(capsys, *args, "--force")[0] == 0
    assert_consistent(out)


def _driver(spec: dict, **kwargs):
    env = {**os.environ, "PYTHONPATH": f"{ROOT}{os.pathsep}{ROOT / 'tests'}"}
    return subprocess.Popen([sys.executable, str(ROOT / "tests" / "faults_driver.py"), json.dumps(spec)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, **kwargs)


def test_real_kills_at_several_points_of_writing_and_a_second_run_into_a_busy_folder(capsys, tmp_path, inputs):
    # One driver process, forked children (see faults_driver.py). First a run
    # that pauses at its third rename: a second run into the same folder is
    # refused, then the first is SIGKILLed and its lock dies with it. Then
    # seeded points: SIGKILL while a file is being written or before its rename
    # (the last rename is run.json's), SIGINT and SIGTERM likewise, each into a
    # copy of a folder holding a whole earlier run. After each: no run.json (the
    # rerun removed the old one first), and every file under a final name is whole.
    import shutil

    system_file, weather = inputs
    argv = ["season", str(system_file), str(weather), "--force", "--out"]
    first = tmp_path / "first"
    assert run_cli(capsys, *argv, str(first))[0] == 0
    renames = len(assert_consistent(first)["outputs"]) + 1
    rng = random.Random(14)
    points = [("SIGKILL", "mkstemp", rng.randint(2, renames)), ("SIGKILL", "replace", renames),
              ("SIGINT", "replace", rng.randint(1, renames - 1)), ("SIGTERM", "mkstemp", rng.randint(2, renames))]
    folders = [tmp_path / f"out{k}" for k in range(len(points))]
    for folder in folders:
        shutil.copytree(first, folder)
    busy, marker = tmp_path / "busy", tmp_path / "paused"
    runs = [{"argv": argv + [str(busy)], "point": ["pause", "replace", 3]}]
    proc = _driver({"runs": runs + [{"argv": argv + [str(f)], "point": p} for f, p in zip(folders, points)],
                    "marker": str(marker)})
    try:
        deadline = time.monotonic() + 300
        while not marker.exists():
            assert proc.poll() is None and time.monotonic() < deadline
            time.sleep(0.05)
        time.sleep(0.1)
        code, _, err = run_cli(capsys, *argv, str(busy))  # a second run while the first writes
        assert code == 2 and "in use by another pvsource run" in err and err.count("\n") == 1
        os.kill(int(marker.read_text()), signal.SIGKILL)
        stdout, stderr = proc.communicate(timeout=600)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    fd = os.open(busy, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)  # the killed run's lock is gone with it
    finally:
        os.close(fd)
    ended = [json.loads(line) for line in stdout.splitlines()]
    assert [e["point"] for e in ended] == [runs[0]["point"]] + [list(p) for p in points], stderr
    for e, folder in zip(ended[1:], folders):
        sig = e["point"][0]
        assert e == ({**e, "exit": 130} if sig == "SIGINT" else {**e, "signal": getattr(signal, sig)}), stderr
        assert not (folder / "run.json").exists()
        json.loads((folder / "summary.json").read_text())
        assert len(pd.read_parquet(folder / "steps.parquet")) == 24 * DAYS
    assert [p for p in folders[0].iterdir() if p.name.startswith(".")]  # a SIGKILL leaves its temporary file
    # A later --force run cleans up after the kill and leaves one consistent run.
    for folder in (folders[0], busy):
        code, _, err = run_cli(capsys, *argv, str(folder))
        assert code == 0, err
        assert not [p for p in folder.iterdir() if p.name.startswith(".")]
        assert_consistent(folder)


def _mount_tmpfs(path: Path, options: str) -> bool:
    path.mkdir(parents=True, exist_ok=True)
    try:
        done = subprocess.run(["mount", "-t", "tmpfs", "-o", options, "tmpfs", str(path)],
                              capture_output=True, timeout=20)
    except (OSError, subprocess.TimeoutExpired):
        return False
    return done.returncode == 0


@pytest.mark.parametrize("options, words", [("ro,size=1m", "read-only"), ("size=96k", "no space left")])
def test_a_read_only_or_full_disk_is_one_line_and_exit_3(capsys, tmp_path, inputs, options, words):
    system_file, weather = inputs
    mount = tmp_path / "mnt"
    if not _mount_tmpfs(mount, options):
        pytest.skip("this machine does not allow mounting a tmpfs")
    try:
        out = mount / "out"
        code, _, err = run_cli(capsys, "season", str(system_file), str(weather), "--out", str(out))
        assert code == 3 and words in err and str(mount) in err and err.count("\n") == 1, err
        assert "internal error" not in err
        if out.exists():  # what was written is whole; no manifest claims it is a run
            assert not (out / "run.json").exists()
            assert not [p for p in out.iterdir() if p.name.startswith(".")]
    finally:
        subprocess.run(["umount", str(mount)], capture_output=True, timeout=20)


def test_a_whole_season_reads_its_weather_from_a_shell_pipe(tmp_path, inputs):
    # Issue 14 fault 10: `season system.toml <(cat w.csv)`, run by a real shell.
    # The stream is read once; the manifest holds the hash of what was read,
    # and the steps equal those of the same file read from disk.
    import shutil

    bash = shutil.which("bash")
    if bash is None:
        pytest.skip("no bash for process substitution")
    system_file, weather = inputs
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    piped, plain = tmp_path / "piped", tmp_path / "plain"
    script = (f'"{sys.executable}" -m pvsource season "{system_file}" <(cat "{weather}") --out "{piped}" && '
              f'"{sys.executable}" -m pvsource season "{system_file}" "{weather}" --out "{plain}"')
    done = subprocess.run([bash, "-c", script], capture_output=True, text=True, env=env, timeout=600)
    assert done.returncode == 0, done.stderr
    manifest = assert_consistent(piped)
    assert [r["sha256"] for r in manifest["inputs"] if r["kind"] == "weather"] == [sha(weather)]
    pd.testing.assert_frame_equal(pd.read_parquet(piped / "steps.parquet"), pd.read_parquet(plain / "steps.parquet"))
