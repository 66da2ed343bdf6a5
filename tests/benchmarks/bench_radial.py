"""Benchmark (a script, not a test): the two-dimensional model against the one-dimensional one.

1. One simulation of the 2-D demo case (oxidation-radial.toml, coolant at 80 bar) at 3, 6 and 12 radial
   points: median time, the ratio to the 1-D simulation of the same case (without its checks, and with them as
   simulate runs it) over interleaved pairs (target at 6 points: <= 10), and the hot spot (its change with the
   grid).
2. Screening: seconds per sample of the 1-D and the 2-D model, each batched (optimizer.screening.evaluation
   .evaluate, models.batch.radial_model), on the same 32 rows of the demo's uncertain inputs.

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


def paired(fn_a, fn_b, repeat=15):
    """Median times of a and b and the median and quartiles of the ratio b/a over interleaved pairs: the
    machine's speed drifts by tens of per cent between runs, which separate medians would put in the ratio."""
    a, b, r = [], [], []
    for _ in range(repeat):
        t = time.perf_counter()
        fn_a()
        a.append(time.perf_counter() - t)
        t = time.perf_counter()
        fn_b()
        b.append(time.perf_counter() - t)
        r.append(b[-1] / a[-1])
    q1, _, q3 = statistics.quantiles(r, n=4)
    return statistics.median(a), statistics.median(b), statistics.median(r), q1, q3


def main():
    case = load_case(DEMO / "oxidation-radial.toml")
    print(f"1-D hot spot {simulate(case, checks=False).summary['max_temperature_K']:.4f} K")
    print(f"{'radial points':>14}{'1-D [s]':>9}{'2-D [s]':>9}{'ratio (quartiles)':>24}{'to 1-D + checks':>17}"
          f"{'centre hot spot [K]':>21}")
    for n in (3, 6, 12):
        one, two, ratio, q1, q3 = paired(lambda: simulate(case, checks=False), lambda n=n: simulate_radial(case, n))
        checked, _, to_checked, _, _ = paired(lambda: simulate(case), lambda n=n: simulate_radial(case, n), 5)
        hot = simulate_radial(case, n).summary["centre_hot_spot_K"]
        print(f"{n:>14}{one:>9.4f}{two:>9.3f}{ratio:>8.1f} ({q1:.1f}-{q3:.1f}){to_checked:>17.2f}{hot:>21.6f}")
    screen = load_case(DEMO / "oxidation-screen.toml", {"coolant.pressure": "80 bar"})
    items = read_uncertain(screen)
    rows = np.random.default_rng(0).uniform(0.05, 0.95, size=(32, len(items)))
    t0 = time.perf_counter()
    evaluate(screen, items, rows)
    batch = (time.perf_counter() - t0) / len(rows)
    t0 = time.perf_counter()
    evaluate(screen, items, rows, radial=True)
    two = (time.perf_counter() - t0) / len(rows)
    print(f"screening, 32 samples: 1-D batched {batch * 1e3:.1f} ms/sample, 2-D batched {two * 1e3:.1f} "
          f"ms/sample, ratio {two / batch:.1f}")


if __name__ == "__main__":
    main()
