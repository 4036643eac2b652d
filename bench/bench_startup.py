"""Time the command line's start: ``pvsource --version`` and every ``--help``.

Target (issue 11, section 2): each answers within half a second. Each case
runs as a fresh ``python -m pvsource`` process, as a user's shell runs it,
best and median of K runs; a bare ``python -c pass`` is timed beside them
for the interpreter's own start on this machine.

Run: python bench/bench_startup.py [--repeat K]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import subprocess
import sys
import time

CASES = [["--version"], ["--help"], *([name, "--help"] for name in
                                      ("point", "wire", "check", "sweep", "season", "demo", "explore", "fleet", "fit"))]


def _cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def timed(args: list[str]) -> tuple[float, float]:
    """(wall, CPU) seconds of one run; CPU time is less disturbed by a busy machine."""
    cpu0, start = _cpu_s(), time.perf_counter()
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start, _cpu_s() - cpu0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()
    rows = [("python -c pass", [sys.executable, "-c", "pass"])]
    rows += [(f"pvsource {' '.join(case)}", [sys.executable, "-m", "pvsource", *case]) for case in CASES]
    print(f"{'command':<28} {'best s':>7} {'median s':>9} {'median CPU s':>13}")
    worst = 0.0
    for label, cmd in rows:
        runs = [timed(cmd) for _ in range(args.repeat)]
        wall = [w for w, _ in runs]
        print(f"{label:<28} {min(wall):7.3f} {statistics.median(wall):9.3f} {statistics.median(c for _, c in runs):13.3f}")
        if label.startswith("pvsource"):
            worst = max(worst, statistics.median(wall))
    print(f"\nslowest median wall time: {worst:.3f} s (target: at most 0.5 s)")


if __name__ == "__main__":
    main()
