"""Benchmark (a script, not a test): simulation time of the demo cases, plain and with checks.

Run: .venv/bin/python tests/benchmarks/bench_simulate.py"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

from tubewright.models import load_case, simulate

DEMO = Path(__file__).resolve().parents[2] / "studies" / "demo"


def timed(fn, repeat=5):
    values = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        values.append(time.perf_counter() - t)
    return statistics.median(values)


def main():
    print(f"{'case':<16}{'simulate [s]':>14}{'with checks [s]':>17}{'ratio':>8}")
    for name in ("oxidation", "coil"):
        case = load_case(DEMO / f"{name}.toml")
        plain = timed(lambda case=case: simulate(case, checks=False))
        full = timed(lambda case=case: simulate(case))
        print(f"{name:<16}{plain:>14.3f}{full:>17.3f}{full / plain:>8.2f}")


if __name__ == "__main__":
    main()
