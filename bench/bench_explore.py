"""Design-years per second of `explore`: in-process, and on a LocalCluster with 1 and 2 workers.

200 combinations (tilt x feeder size x bank capacity by default, all of
which pass the design checks) of the demo system over its synthetic hourly year, each engine in
turn on the same combinations, in the same run. Prints the scaling table.

Run: python bench/bench_explore.py [--combinations 200]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from pvsource.conductors import parse_size
from pvsource.demo import demo_system, synthetic_weather
from pvsource.explore import explore

PRICES = {"price_per_kg": 12.0, "energy_value": 0.3, "years": 20.0}


def choices(count: int) -> dict:
    """Feasible choices whose product has about ``count`` combinations: tilt x feeder size x bank capacity."""
    sizes, capacities = [parse_size("6 mm2"), parse_size("10 mm2")], [150.0, 200.0, 250.0, 300.0]
    tilts = [10.0 + k * 50.0 / max(count // 8 - 1, 1) for k in range(max(count // 8, 1))]
    return {"tilt_deg": tilts, "size:roof to controller": sizes, "bank_capacity_ah": capacities}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--combinations", type=int, default=200)
    args = parser.parse_args()
    system = demo_system()
    weather = synthetic_weather(system)
    vary = choices(args.combinations)
    n = 1
    for v in vary.values():
        n *= len(v)
    rows = []
    for label, kwargs in (("in-process (all cores)", {}), ("LocalCluster, 1 worker", {"engine": "dask", "workers": 1}),
                          ("LocalCluster, 2 workers", {"engine": "dask", "workers": 2})):
        with tempfile.TemporaryDirectory() as out:
            t0 = time.perf_counter()
            ranked = explore(system, weather, vary, Path(out), PRICES, **kwargs)
            elapsed = time.perf_counter() - t0
        rows.append((label, elapsed, len(ranked)))
    print(f"{n} combinations, each a year of hourly weather (8,760 steps)")
    print(f"{'engine':<26}{'seconds':>10}{'design-years/s':>16}")
    for label, elapsed, count in rows:
        print(f"{label:<26}{elapsed:>10.1f}{count / elapsed:>16.2f}")


if __name__ == "__main__":
    main()
