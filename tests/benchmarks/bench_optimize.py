"""Benchmark (a script, not a test): compile and solve figures of the bridge.

Prints, for the demo design optimisation and for the A -> B -> C temperature-profile problem (ideal bound)
at 50, 100 and 200 finite elements: compile time, IPOPT iterations, solve time, time in callbacks and
their ratios; then the cost of a re-solve after a parameter change (no compilation).

Run: .venv/bin/python tests/benchmarks/bench_optimize.py"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))

from builders import logsdon_biegler_data  # noqa: E402
from tubewright.models import load_case  # noqa: E402
from tubewright.models.casefile import build_case  # noqa: E402
from tubewright.optimizer.design.ideal import free_temperature_profile  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402


def row(label, problem, outcome, build_s):
    t = outcome.times
    print(f"{label:<26}{problem.nlp.n:>7}{problem.nlp.times['forms']:>6}{build_s:>9.2f}{t['compile_s']:>9.2f}"
          f"{outcome.iterations:>6}{t['solve_s']:>9.2f}{t['callbacks_s']:>9.2f}"
          f"{t['compile_s'] / t['solve_s']:>9.2f}{t['callbacks_s'] / t['solve_s']:>9.2f}")


def main():
    print(f"{'problem':<26}{'vars':>7}{'forms':>6}{'build':>9}{'compile':>9}{'iter':>6}{'solve':>9}"
          f"{'callbk':>9}{'cmp/slv':>9}{'cb/slv':>9}")
    case = load_case(ROOT / "studies" / "demo" / "oxidation-design.toml")
    t0 = time.perf_counter()
    demo = DesignProblem(case).build()
    build = time.perf_counter() - t0
    row("demo min_cost", demo, demo.solve_nlp(), build)
    for nfe in (50, 100, 200):
        c = build_case(logsdon_biegler_data(nfe), "logsdon-biegler")
        t0 = time.perf_counter()
        p = DesignProblem(c)
        p.build(modify=free_temperature_profile(p))
        build = time.perf_counter() - t0
        row(f"A->B->C ideal, {nfe} el.", p, p.solve_nlp(), build)
    compile_before = demo.nlp.times["compile_s"]
    demo.model.k_ref[0] = demo.model.k_ref[0].value * 1.05
    t0 = time.perf_counter()
    again = demo.solve_nlp(warm_start=True)
    unchanged = demo.nlp.times["compile_s"] == compile_before
    print(f"\nre-solve of the demo after k_ref x 1.05: {time.perf_counter() - t0:.2f} s, {again.iterations} "
          f"iterations, {again.status_name}; compilation time unchanged: {unchanged}")


if __name__ == "__main__":
    main()
