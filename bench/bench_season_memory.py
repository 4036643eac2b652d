"""Peak memory of the whole `pvsource season` command against the length of the study.

Target (issue 14): the season study streams its steps in chunks, so peak
memory stays at most 1.5 GB for a two-year one-minute file and grows by at
most 0.2 GB per further year.

The weather is the demo's synthetic weather at one-minute steps, one
invented year after another (2025, 2026, ...), written as CSV files with
offset timestamps; each span runs as its own process, timed by the wall
clock from start to exit, with its own peak resident memory from the
operating system (os.wait4), reading and every output file included. The
weather is written by a separate process, so the measuring process stays
small (a child's peak memory starts from its parent's size at the fork).

Run: python bench/bench_season_memory.py [--years 0.25 0.5 1 2 3] [--freq 1min] [--keep DIR]
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from bench_season import run_measured  # noqa: E402


def weather_csv(folder: Path, years: float, freq: str) -> tuple[Path, int]:
    """The demo's weather for ``years`` years from 2025 as a CSV; its path and row count.

    Written by a child process: a measured run is started from this process,
    and on Linux a child's peak resident memory starts from its parent's
    size at the fork, so this process must stay small.
    """
    import json
    import subprocess

    done = subprocess.run([sys.executable, __file__, "--write", str(years), freq, str(folder)],
                          capture_output=True, text=True, check=True)
    path, rows = json.loads(done.stdout)
    return Path(path), rows


def _write(years: float, freq: str, folder: Path) -> tuple[Path, int]:
    import math

    import pandas as pd

    from pvsource.demo import demo_system, synthetic_weather

    system = demo_system()
    parts = [synthetic_weather(system, year=2025 + k, freq=freq) for k in range(math.ceil(years))]
    weather = pd.concat(parts)
    weather = weather.iloc[: int(round(len(weather) * years / math.ceil(years)))]
    csv = folder / f"weather-{years:g}y.csv"
    table = weather.copy()
    table.index = table.index.map(lambda ts: ts.isoformat())
    table.index.name = "timestamp"
    table.to_csv(csv)
    return csv, len(weather)


def main():
    from importlib import resources

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--years", type=float, nargs="+", default=[0.25, 0.5, 1.0, 2.0, 3.0])
    parser.add_argument("--freq", default="1min")
    parser.add_argument("--keep", type=Path, help="keep the inputs and outputs in this folder")
    args = parser.parse_args()
    folder = Path(args.keep or tempfile.mkdtemp(prefix="bench-memory-"))
    folder.mkdir(parents=True, exist_ok=True)
    system_file = folder / "sys.toml"
    system_file.write_text((resources.files("pvsource") / "data" / "demo" / "system.toml").read_text())
    try:
        rows_mb = []
        print(f"{'years':>6} {'rows':>10} {'CSV MB':>7} {'seconds':>8} {'peak MB':>8}")
        for years in args.years:
            csv, rows = weather_csv(folder, years, args.freq)
            out = folder / f"out-{years:g}y"
            shutil.rmtree(out, ignore_errors=True)
            run = run_measured([sys.executable, "-m", "pvsource", "season", str(system_file), str(csv),
                                "--out", str(out), "--json"])
            rows_mb.append((years, run["peak_mb"]))
            print(f"{years:6g} {rows:10,} {csv.stat().st_size / 1e6:7.0f} {run['seconds']:8.1f} {run['peak_mb']:8.0f}",
                  flush=True)
            csv.unlink()
        two = [mb for y, mb in rows_mb if y == 2.0]
        if two:
            print(f"two years: peak {two[0]:.0f} MB ({'within' if two[0] <= 1536 else 'ABOVE'} 1.5 GB)")
        if len(rows_mb) >= 2:
            (y0, m0), (y1, m1) = rows_mb[-2], rows_mb[-1]
            per_year = (m1 - m0) / (y1 - y0)
            print(f"growth from {y0:g} to {y1:g} years: {per_year:.0f} MB per year "
                  f"({'within' if per_year <= 200 else 'ABOVE'} 0.2 GB per year)")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    if len(sys.argv) == 5 and sys.argv[1] == "--write":
        import json

        path, rows = _write(float(sys.argv[2]), sys.argv[3], Path(sys.argv[4]))
        print(json.dumps([str(path), rows]))
    else:
        main()
