"""Benchmark (a script, not a test): the two-dimensional model against the one-dimensional one.

1. One simulation of the 2-D demo case (oxidation-radial.toml, coolant at 80 bar) at 3, 6 and 12 radial
   points: median time, ratio to the 1-D simulation of the same case (target at 6 points: <= 10), and the
   hot spot (its change with the grid).
2. Screening: seconds per sample of the 1-D model in one batch against the 2-D model one sample at a time
   (optimizer.screening.evaluation.evaluate), on the same 32 rows of the demo's uncertain inputs.

Run: .venv/bin/python tests/benchmarks/bench_radial.py"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

import numpy as np
from tubewright.models import load_case, simulate
from tubewright.models.radial import simulate_radial
from tubewright.optimizer.screening.evaluation import evaluate
from tubewright.optimizer.screening.uncertain import read_uncertain

DEMO = Path(__file__).resolve().parents[2] / "studies" / "demo"


def timed(fn, repeat=11):
    values = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        values.append(time.perf_counter() - t)
    return statistics.median(values)


def main():
    case = load_case(DEMO / "oxidation-radial.toml")
    one = timed(lambda: simulate(case, checks=False))
    checked = timed(lambda: simulate(case))
    print(f"1-D simulation: {one:.4f} s ({checked:.4f} s with its checks, as simulate prints it), hot spot "
          f"{simulate(case, checks=False).summary['max_temperature_K']:.4f} K")
    print(f"{'radial points':>14}{'2-D [s]':>10}{'ratio to 1-D':>14}{'to 1-D + checks':>17}"
          f"{'centre hot spot [K]':>21}")
    for n in (3, 6, 12):
        t = timed(lambda n=n: simulate_radial(case, n))
        hot = simulate_radial(case, n).summary["centre_hot_spot_K"]
        print(f"{n:>14}{t:>10.3f}{t / one:>14.1f}{t / checked:>17.2f}{hot:>21.6f}")
    screen = load_case(DEMO / "oxidation-screen.toml", {"coolant.pressure": "80 bar"})
    items = read_uncertain(screen)
    rows = np.random.default_rng(0).uniform(0.05, 0.95, size=(32, len(items)))
    t0 = time.perf_counter()
    evaluate(screen, items, rows)
    batch = (time.perf_counter() - t0) / len(rows)
    t0 = time.perf_counter()
    evaluate(screen, items, rows, radial=True)
    two = (time.perf_counter() - t0) / len(rows)
    print(f"screening, 32 samples: 1-D batched {batch * 1e3:.1f} ms/sample, 2-D one at a time {two * 1e3:.1f} "
          f"ms/sample, ratio {two / batch:.1f}")


if __name__ == "__main__":
    main()
