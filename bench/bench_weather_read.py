"""Reading and checking a one-minute weather year against pandas' plain read_csv of the same file.

Run: ``python bench/bench_weather_read.py`` (writes a 525,600-row CSV into a
temporary folder). Prints the best of five runs of each, and their ratio: the
reader's goal is at most twice pandas' plain ``read_csv``.
"""

import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from pvsource.weather import read_weather

ROWS = 525_600


def write_year(path: Path) -> None:
    """An invented one-minute year with ISO timestamps and offsets, as a logger would write it."""
    times = pd.date_range("2025-01-01", periods=ROWS, freq="min", tz="+01:00")
    rng = np.random.default_rng(1)
    minute = np.arange(ROWS)
    pd.DataFrame({
        "timestamp": times.strftime("%Y-%m-%dT%H:%M:%S+01:00"),
        "ghi": np.round(np.clip(900 * np.sin(2 * np.pi * (minute % 1440 - 360) / 1440), 0, None), 1),
        "temp_air": np.round(10 + 8 * np.sin(2 * np.pi * minute / 525_600) + rng.normal(0, 2, ROWS), 1),
        "wind_speed": np.round(rng.uniform(0, 6, ROWS), 1),
    }).to_csv(path, index=False)


def best(fn, repeat=5) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "minute-year.csv"
        write_year(path)
        plain = best(lambda: pd.read_csv(path))
        ours = best(lambda: read_weather(path))
        rows, size = len(read_weather(path)), path.stat().st_size
    print(f"{rows:,} rows, {size / 1e6:.1f} MB")
    print(f"pandas read_csv:          {plain:.2f} s")
    print(f"pvsource read_weather:    {ours:.2f} s  ({ours / plain:.2f} x read_csv; goal <= 2)")


if __name__ == "__main__":
    main()
