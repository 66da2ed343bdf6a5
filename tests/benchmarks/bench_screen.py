"""Benchmark (a script, not a test): evaluations per second of the demo gas-phase screening, one sample at a
time (the plain simulator, LSODA) and batched (stacked states, BDF with a block-sparse Jacobian), and the
ratio. Same samples, same tolerances.

Run: .venv/bin/python tests/benchmarks/bench_screen.py [samples]"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

from tubewright.models import load_case  # noqa: E402
from tubewright.optimizer.screening.evaluation import evaluate  # noqa: E402
from tubewright.optimizer.screening.sampling import sample  # noqa: E402
from tubewright.optimizer.screening.uncertain import read_uncertain, salib_problem  # noqa: E402


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 128
    case = load_case(ROOT / "studies" / "demo" / "oxidation-screen.toml")
    items = read_uncertain(case)
    ux = sample(salib_problem(items), "sobol", n, seed=0)
    single = evaluate(case, items, ux[: min(len(ux), 400)], batched=False)
    batched = evaluate(case, items, ux, batched=True, workers=1)
    parallel = evaluate(case, items, ux, batched=True, workers=2)
    rate_single = single.status.size / single.seconds
    rate_batched = batched.status.size / batched.seconds
    print(f"samples: {batched.status.size} batched, {single.status.size} one at a time")
    print(f"one at a time: {rate_single:8.1f} evaluations/s")
    print(f"batched:       {rate_batched:8.1f} evaluations/s ({batched.handed_over} samples handed over to the "
          "single simulator)")
    rate_parallel = parallel.status.size / parallel.seconds
    print(f"batched, 2 processes: {rate_parallel:8.1f} evaluations/s "
          f"({rate_parallel / rate_batched:.2f} x one process)")
    print(f"ratio batched / one at a time: {rate_batched / rate_single:.1f} (one process), "
          f"{rate_parallel / rate_single:.1f} (two processes)")
    print(f"projected time for 10 000 evaluations: {10000 / rate_parallel:.0f} s batched on 2 processes, "
          f"{10000 / rate_batched:.0f} s batched on one, {10000 / rate_single:.0f} s one at a time")


if __name__ == "__main__":
    main()
