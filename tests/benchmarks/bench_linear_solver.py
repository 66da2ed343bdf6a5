"""Benchmark (a script, not a test): IPOPT's time on the demo design optimisation against the number of
finite elements, for MUMPS's fill-reducing orderings (IPOPT option ``mumps_pivot_order``: 0 AMD, 2 AMF,
4 PORD, 6 QAMD, 7 automatic choice, IPOPT's default; this MUMPS build has no METIS or SCOTCH). Each solve is
capped by ``max_cpu_time``. Prints the time per ordering and size and its growth from the smallest size.

Measured here (2 cores, IPOPT 3.14 with MUMPS from cyipopt-wheels), seconds of IPOPT for one solve:
15/30/60/120 elements AMF 0.55/1.02/1.82 (benchmark) and 6.1 s at 120; AMD 30 s and automatic 54 s at 120.
All orderings took the same time up to 30 elements; at 90 elements AMF needed 124 iterations to an
acceptable point (21 s) against 49 to the optimum (30 s) for the automatic choice. No ordering wins at every
size, so IPOPT's automatic choice stays the default (DesignProblem.mumps_ordering). mumps_mem_percent made
no difference (1000 and 4000 at 120 elements) and stays at IPOPT's default, 1000.

Run: .venv/bin/python tests/benchmarks/bench_linear_solver.py [sizes...]"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

from tubewright.models import load_case  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402

ORDERINGS = {0: "AMD", 2: "AMF", 4: "PORD", 6: "QAMD", 7: "auto"}
CAP_S = 60.0


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [15, 30, 60, 120]
    case = load_case(ROOT / "studies" / "demo" / "oxidation-design.toml")
    print(f"{'elements':>9}{'vars':>8}" + "".join(f"{name:>12}" for name in ORDERINGS.values()))
    first, growth = {}, {}
    for nfe in sizes:
        problem = DesignProblem(case, nfe=nfe).build()
        start = [(v, v.value) for v in problem.nlp.variables]
        cells = []
        for order in ORDERINGS:
            for v, x in start:
                v.set_value(x, skip_validation=True)
            opts = {"max_iter": 500, "tol": 1e-7, "acceptable_tol": 1e-5, "mumps_pivtol": 1e-4,
                    "mumps_pivot_order": order, "max_cpu_time": CAP_S}
            out = problem.nlp.solve(options=opts, scaling=problem.scaling())  # one solve: no shell passes
            t = out.times["ipopt_s"] + out.times["callbacks_s"]
            first.setdefault(order, t)
            growth.setdefault(order, []).append(t / first[order])
            mark = "" if out.success else "*"
            cells.append(f"{t:>10.2f}{mark:1} ")
        print(f"{nfe:>9}{problem.nlp.n:>8}" + "".join(cells))
    print(f"\n* not converged (capped at {CAP_S:.0f} s, or failed). Time relative to {sizes[0]} elements "
          f"(elements grow {sizes[-1] / sizes[0]:g}x):")
    for order, name in ORDERINGS.items():
        print(f"  {name:<6}" + "".join(f"{g:>9.1f}" for g in growth[order]))


if __name__ == "__main__":
    main()
