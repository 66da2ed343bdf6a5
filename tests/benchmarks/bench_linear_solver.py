"""Benchmark (a script, not a test): IPOPT's time against the number of finite elements for settings of its
linear solver MUMPS, on the demo design optimisation (15-120 elements) and the A -> B -> C
temperature-profile problem (50-400 elements). Settings (IPOPT options): the fill-reducing ordering
``mumps_pivot_order`` (0 AMD, 2 AMF, 7 MUMPS's automatic choice; this MUMPS has no METIS or SCOTCH), the
row/column scaling ``mumps_scaling`` (77 automatic, 8 iterative row and column scaling, 0 none) and the
permutation with scaling of the symmetric matrix ``mumps_permuting_scaling`` (7 automatic, 0 none). Each
solve is capped by ``max_cpu_time``. Prints IPOPT plus callback time per setting and size, the iterations,
and each setting's time per element relative to its smallest size (1.0 = linear in the elements).

Measured here (2 cores, IPOPT 3.14.11, MUMPS 5.5.1 from cyipopt-wheels):
- IPOPT's defaults (7/77/7) fail where MUMPS's automatic permutation with scaling meets the large
  collocation KKT systems: the demo at 120 elements took 54 s, the A -> B -> C problem at 400 elements
  stopped with "restoration failed" after one iteration (MUMPS: "matrix is singular" for every inertia
  correction, 50 s).
- Without that permutation (``mumps_permuting_scaling 0``) or with iterative scaling
  (``mumps_scaling 8``) every setting solves every size, in time per element within 0.7-1.2 of the smallest
  size (roughly linear): demo 0.36/0.55/1.08/2.46 s at 15/30/60/120 elements, A -> B -> C
  0.30/0.71/1.25/2.58 s at 50/100/200/400 (26 iterations at 400, same optimum 0.610803). The orderings
  differ by less than 25 % once the permutation is off.
tubewright's default (models.case.Numerics) is "no permuting": MUMPS's automatic ordering and scaling with
the permutation off, the simplest change from IPOPT's defaults that solves everything here.
Since the balance rows are built on one element template (nlp.families, 2026-12-03: the same collocation
coefficients in every element) and the design tube without Q and tau, IPOPT's defaults solve every size too;
no permuting: demo 0.20/0.53/0.78/1.14 s at 15/30/60/120 elements, A -> B -> C 0.15/0.26/0.37/0.80 s at
50/100/200/400 (the other settings within 25 %), time per element 0.6-1.3 of the smallest size.

Run: .venv/bin/python tests/benchmarks/bench_linear_solver.py [--quick]"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))

from builders import logsdon_biegler_data  # noqa: E402
from tubewright.models import load_case  # noqa: E402
from tubewright.models.casefile import build_case  # noqa: E402
from tubewright.optimizer.design.ideal import free_temperature_profile  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402

SETTINGS = {  # label: (mumps_pivot_order, mumps_scaling, mumps_permuting_scaling)
    "IPOPT defaults": (7, 77, 7),
    "no permuting": (7, 77, 0),
    "iterative scal.": (7, 8, 7),
    "iter. + no perm.": (7, 8, 0),
    "AMF, no perm.": (2, 77, 0),
    "AMD, no perm.": (0, 77, 0),
}
CAP_S = 30.0


def demo_problem(nfe):
    return DesignProblem(load_case(ROOT / "studies" / "demo" / "oxidation-design.toml"), nfe=nfe).build()


def abc_problem(nfe):
    p = DesignProblem(build_case(logsdon_biegler_data(nfe), "a-b-c"))
    return p.build(modify=free_temperature_profile(p))


def run(label, make, sizes):
    print(f"\n{label}: IPOPT + callback seconds (iterations); * not converged (capped at {CAP_S:.0f} s or failed)")
    print(f"{'elements':>9}{'vars':>8}" + "".join(f"{name:>18}" for name in SETTINGS))
    times = {name: [] for name in SETTINGS}
    for nfe in sizes:
        problem = make(nfe)
        start = [(v, v.value) for v in problem.nlp.variables]
        cells = []
        for name, (order, scaling, permuting) in SETTINGS.items():
            for v, x in start:
                v.set_value(x, skip_validation=True)
            opts = {"max_iter": 500, "tol": 1e-7, "acceptable_tol": 1e-5, "mumps_pivtol": 1e-4,
                    "mumps_pivot_order": order, "mumps_scaling": scaling, "mumps_permuting_scaling": permuting,
                    "max_cpu_time": CAP_S}
            out = problem.nlp.solve(options=opts, scaling=problem.scaling())  # one solve: no shell passes
            t = out.times["ipopt_s"] + out.times["callbacks_s"]
            times[name].append(t if out.success else float("nan"))
            cells.append(f"{t:>8.2f} ({out.iterations:>3}){'' if out.success else '*':1}   "[:18].rjust(18))
        print(f"{nfe:>9}{problem.nlp.n:>8}" + "".join(cells))
    print("time per element relative to the smallest size (1.0: linear in the elements; nan: failed):")
    for name, ts in times.items():
        print(f"  {name:<18}" + "".join(f"{(t / ts[0]) / (n / sizes[0]):>8.2f}" for t, n in zip(ts, sizes)))
    return times


def main():
    quick = "--quick" in sys.argv
    run("demo design optimisation", demo_problem, [15, 30, 60] if quick else [15, 30, 60, 120])
    run("A -> B -> C temperature profile", abc_problem, [50, 100] if quick else [50, 100, 200, 400])


if __name__ == "__main__":
    main()
