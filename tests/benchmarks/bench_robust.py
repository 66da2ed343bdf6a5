"""Benchmark (a script, not a test): the robust design of the demo (studies/demo/oxidation-design.toml, its
[uncertain] kinetics and heat-transfer multiplier) with K = 8, 16 and 32 scenarios, started from the nominal
optimum and its number of shells as optimize --scenarios does. Prints the build and
compile time, the number of forms, IPOPT's iterations and time, the time per scenario and the ratio of the
robust solve to the nominal one (target: K = 16 in less than 10x the nominal solve). Each robust solve is
paired with a nominal solve just before it and the ratio is the median over REPEAT pairs: this machine's
speed drifts by tens of per cent between runs, which one nominal timing would put into every ratio.

Run: .venv/bin/python tests/benchmarks/bench_robust.py [K ...]"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

from tubewright.models import load_case  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402
from tubewright.optimizer.design.robust import draw_scenarios  # noqa: E402


def solve(case, scenarios, start=None, shells=None):
    t0 = time.perf_counter()
    p = DesignProblem(case, scenarios=scenarios).build(start)
    if shells:
        p.model.shells = shells
    built = time.perf_counter() - t0
    out = p.solve_nlp()
    return p, out, built


REPEAT = 3


def main():
    import statistics

    sizes = [int(a) for a in sys.argv[1:]] or [8, 16, 32]
    case = load_case(ROOT / "studies" / "demo" / "oxidation-design.toml")
    nominal, nom_out, nom_built = solve(case, None)
    nom_solve = nom_out.times["solve_s"]
    print(f"{'K':>4}{'build s':>9}{'compile s':>11}{'forms':>7}{'vars':>8}{'iter':>6}{'solve s':>9}"
          f"{'s/scen.':>9}{'solve/nominal':>15}  status")
    print(f"{0:>4}{nom_built:>9.2f}{nominal.nlp.times['compile_s']:>11.2f}{nominal.nlp.times['forms']:>7}"
          f"{nominal.nlp.n:>8}{nom_out.iterations:>6}{nom_solve:>9.2f}{'-':>9}{1.0:>15.2f}  {nom_out.status_name}")
    # as robust_design: from the nominal optimum and its number of shells
    start = {k: v for k, v in nominal.design_values().items() if k in nominal.spec.free}
    shells = int(nominal.model.shells.value)
    for k in sizes:
        _, scenarios = draw_scenarios(case, k, seed=0)
        ratios, times = [], []
        for _ in range(REPEAT if k <= 16 else 1):
            _, again, _ = solve(case, None)
            p, out, built = solve(case, scenarios, start, shells)
            times.append(out.times["solve_s"])
            ratios.append(out.times["solve_s"] / again.times["solve_s"])
        solve_s = statistics.median(times)
        spread = f" ({min(ratios):.2f}-{max(ratios):.2f})" if len(ratios) > 1 else ""
        print(f"{k:>4}{built:>9.2f}{p.nlp.times['compile_s']:>11.2f}{p.nlp.times['forms']:>7}{p.nlp.n:>8}"
              f"{out.iterations:>6}{solve_s:>9.2f}{solve_s / k:>9.3f}{statistics.median(ratios):>15.2f}  "
              f"{out.status_name}{spread}")


if __name__ == "__main__":
    main()
