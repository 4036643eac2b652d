"""Bounded input: size limits, TOML shape before parsing, streams read once, impossible weather values.

The hostile inputs are issue 14's: /dev/zero as a weather or system file, a
TOML file with one long dotted key, arrays nested 500 deep, ``inf`` and 1e308
in the load and wind columns. Each must end in one line and exit 2, within a
memory limit set in a child process.
"""

import json
import os
import subprocess
import sys
import threading

import numpy as np
import pytest

from pvsource.errors import InputError
from pvsource.inputs import check_toml_shape, read_bounded, recording
from pvsource.weather import read_weather, read_weather_csv

from conftest import ROOT, demo_system_file, run_cli


def weather_lines(n=48):
    rows = ["timestamp,ghi,temp_air,wind_speed,load_w"]
    for k in range(n):
        ghi = max(0.0, 800.0 * np.sin(np.pi * ((k % 24) - 6) / 12))
        rows.append(f"2024-06-01T{k % 24:02d}:00+00:00".replace("06-01", f"06-{1 + k // 24:02d}")
                    + f",{ghi:.1f},20.0,3.0,150.0")
    return rows


@pytest.mark.parametrize("column, value, shown", [
    ("load_w", "inf", "inf W"), ("load_w", "1e308", "1e+308 W"), ("wind_speed", "inf", "inf m/s"),
    ("wind_speed", "-inf", "-inf m/s"), ("temp_air", "nan", "'nan' is not a number"),
])
def test_impossible_values_in_every_column_stop_the_run_naming_row_and_column(tmp_path, column, value, shown):
    # Issue 14: load_w of inf or 1e308 and wind_speed of inf passed with exit 0.
    rows = weather_lines()
    header = rows[0].split(",")
    cells = rows[7].split(",")
    cells[header.index(column)] = value
    rows[7] = ",".join(cells)
    path = tmp_path / "w.csv"
    path.write_text("\n".join(rows) + "\n")
    with pytest.raises(InputError) as exc:
        read_weather_csv(path)
    text = exc.value.one_line()
    assert f"row 8, column '{column}'" in text and shown in text


def test_a_fifo_is_read_once(tmp_path):
    # `season system.toml <(cat w.csv)`: the sniffing must not consume the stream.
    plain = tmp_path / "w.csv"
    plain.write_text("\n".join(weather_lines()) + "\n")
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    writer = threading.Thread(target=lambda: fifo.write_bytes(plain.read_bytes()))
    writer.start()
    with recording() as seen:
        streamed = read_weather(fifo)
    writer.join(timeout=10)
    assert streamed.equals(read_weather(plain))
    assert [r.bytes for r in seen] == [plain.stat().st_size]


def test_size_limits_name_the_option_that_raises_them(tmp_path):
    plain = tmp_path / "w.csv"
    plain.write_text("\n".join(weather_lines()) + "\n")
    with pytest.raises(InputError, match="limit for a weather file; raise it with --max-weather-mb"):
        read_weather(plain, max_mb=0.001)
    big = tmp_path / "big.toml"
    big.write_text("# padding\n" * 200_000)
    with pytest.raises(InputError, match="larger than the 1 MB limit"):
        read_bounded(big, 1 << 20, "system")


@pytest.mark.parametrize("text, words", [
    ("a = " + "[" * 500 + "]" * 500 + "\n", "deeper than"),
    ("x = {" + "a." * 40 + "b = 1}\n", "dotted parts"),
    ("k" * 2000 + " = 1\n", "characters"),
    # A quoted key is held to the same length (one of 200 KB was echoed whole in the error line).
    ('"' + "k" * 200_000 + '" = 1\n', "characters"),
    ("a.'" + "k" * 2000 + "'.b = 1\n", "characters"),
])
def test_hostile_toml_is_refused_before_parsing(text, words):
    with pytest.raises(InputError, match=words):
        check_toml_shape(text, "hostile.toml")


def test_real_files_pass_the_shape_check():
    # Every TOML file the project ships (systems, datasheets, presets) is well inside the limits.
    import tomllib
    files = list((ROOT / "pvsource" / "data").rglob("*.toml")) + list((ROOT / "data").rglob("*.toml"))
    assert files
    for path in files:
        text = path.read_text()
        tomllib.loads(text)
        check_toml_shape(text, str(path))
    check_toml_shape('s = """multi\n[[[[ "quoted" \'\'\' a.b.c.d\n"""\nv = 1.5  # a.b.c [[[\n', "ok.toml")
    # A long string value is not a key: only "=" or "." after a quoted part makes it one.
    long_value = "x" * 5000
    check_toml_shape(f'note = "{long_value}"\nlist = ["{long_value}", \'{long_value}\']\n', "ok.toml")


CHILD = r"""
import json, os, resource, sys, threading
resource.setrlimit(resource.RLIMIT_AS, (int(sys.argv[3]),) * 2)
from pvsource.cli import main
tmp, system = sys.argv[1], sys.argv[2]
fifo = os.path.join(tmp, "zeros")
os.mkfifo(fifo)

def zeros():
    with open(fifo, "wb") as f:
        try:
            while True:
                f.write(bytes(1 << 20))
        except BrokenPipeError:
            pass

threading.Thread(target=zeros, daemon=True).start()
cases = {
    "zero weather": ["season", system, "/dev/zero", "--out", os.path.join(tmp, "o1")],
    "zero system": ["point", "/dev/zero"],
    "zero stream": ["season", system, fifo, "--out", os.path.join(tmp, "o2"), "--max-weather-mb", "64"],
    "dotted key": ["point", os.path.join(tmp, "dotted.toml")],
    "deep arrays": ["point", os.path.join(tmp, "deep.toml")],
}
for name, argv in cases.items():
    try:
        main(argv)
        code = 0
    except SystemExit as exc:
        code = exc.code
    print(json.dumps([name, code]), flush=True)
"""


def test_dev_zero_and_hostile_toml_under_a_memory_limit(tmp_path):
    # Issue 14: /dev/zero grew memory at 300 MB/s, a 200 KB dotted key took 19 GB,
    # 500-deep arrays ended in RecursionError. Under a 2 GB address-space limit
    # each is one line and exit 2, and no output folder is left.
    (tmp_path / "dotted.toml").write_text("a" + ".a" * 100_000 + " = 1\n")  # 200 KB
    (tmp_path / "deep.toml").write_text("a = " + "[" * 500 + "]" * 500 + "\n")
    system = demo_system_file(tmp_path)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    done = subprocess.run([sys.executable, "-c", CHILD, str(tmp_path), str(system), str(2 << 30)],
                          capture_output=True, text=True, timeout=300, env=env)
    results = dict(json.loads(line) for line in done.stdout.splitlines())
    assert results == {"zero weather": 2, "zero system": 2, "zero stream": 2, "dotted key": 2,
                       "deep arrays": 2}, done.stderr
    lines = done.stderr.splitlines()
    assert len(lines) == 5 and all(line.startswith("pvsource: error: ") for line in lines)
    assert "is a device" in lines[0] and "is a device" in lines[1] and "--max-weather-mb" in lines[2]
    assert "dotted parts" in lines[3] and "deeper than" in lines[4]
    assert not (tmp_path / "o1").exists() and not (tmp_path / "o2").exists()


def test_a_weather_file_that_changes_while_read_is_refused(tmp_path, monkeypatch):
    # A regular file is hashed in blocks and parsed from disk; if it is not the
    # file that was hashed by the time it is parsed, the manifest would lie.
    import pandas as pd

    from pvsource import weather

    path = tmp_path / "w.csv"
    path.write_text("\n".join(weather_lines()) + "\n")
    real = pd.read_csv

    def grows(*args, **kwargs):
        with open(path, "a") as f:
            f.write(weather_lines(49)[-1] + "\n")
        return real(*args, **kwargs)

    monkeypatch.setattr(weather.pd, "read_csv", grows)
    with pytest.raises(InputError, match="changed while it was read"):
        read_weather(path)


def test_a_regular_weather_file_is_hashed_in_blocks_as_a_stream_would_be(tmp_path):
    # The same content read from disk (scanned in blocks, parsed from the path)
    # and from memory gives the same frame and the same recorded hash.
    import hashlib

    plain = tmp_path / "w.csv"
    plain.write_text("\ufeff" + "\n".join(weather_lines()) + "\n", encoding="utf-8")
    with recording() as seen:
        from_disk = read_weather(plain)
    assert seen[0].sha256 == hashlib.sha256(plain.read_bytes()).hexdigest()
    assert from_disk.equals(read_weather_csv(plain, data=plain.read_bytes()))
