"""Benchmark (a script, not a test): tubewright's time to optimum on the A -> B -> C temperature-profile
problem (Logsdon and Biegler 1989: A -> B second order, B -> C first order, maximum yield of B over a free
temperature profile, 298-398 K, residence time 1) against the compact Radau collocation an expert would
write by hand in CasADi (states a, b and the temperature at the collocation points only; 9 N + 2
variables for N elements). CasADi is a benchmark-only extra (``pip install -e .[bench]``), never used by
tubewright itself.

Both sides: 3 Radau points per element, IPOPT with MUMPS, tol 1e-8, the MUMPS settings and the adaptive
barrier update of tubewright's defaults. Time to optimum = building the model + compiling + solving,
measured in this process after a warm-up solve (imports excluded; the warm-up also fills tubewright's form
cache, as any earlier run on the machine would). Prints both times, their ratio and the two optima.

Measured here (2 cores), 2026-12-03, median of five interleaved pairs, with the balance rows built once on a
one-element template and repeated by the bridge (nlp.families): ratio 0.59 / 0.45 / 0.32 / 0.28 at
50 / 100 / 200 / 400 elements (before it: 0.97 / 0.96 / 0.81 / 0.86); build / compile / IPOPT / callbacks
0.04 / 0.03 / 0.11 / 0.04 s at 50 and 0.09 / 0.09 / 0.48 / 0.08 s at 400 elements: build and compile stay
below the solve at every size (before: 1.56 s of build and compile against 0.62 s of solve at 400).

Run: .venv/bin/python tests/benchmarks/bench_compact.py [elements...]"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))

from builders import logsdon_biegler_data  # noqa: E402
from tubewright.models.casefile import build_case  # noqa: E402
from tubewright.optimizer.design.ideal import free_temperature_profile  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402


def compact_casadi(nfe: int) -> tuple[float, float, int]:
    """The compact formulation: returns (seconds to optimum, maximum yield of B, number of variables)."""
    import casadi as ca

    t0 = time.perf_counter()
    ncp = 3
    tau = [0.0, *ca.collocation_points(ncp, "radau")]
    # C[k][j]: derivative at point j of the Lagrange polynomial through point k (of the element's ncp + 1)
    C = [[0.0] * (ncp + 1) for _ in range(ncp + 1)]
    for k in range(ncp + 1):
        poly = [1.0]
        for r in range(ncp + 1):
            if r != k:
                poly = [c / (tau[k] - tau[r]) for c in _times_linear(poly, -tau[r])]
        deriv = [i * c for i, c in enumerate(poly)][1:]
        for j in range(ncp + 1):
            C[k][j] = sum(c * tau[j] ** i for i, c in enumerate(deriv))
    h = 1.0 / nfe
    w, w0, lbw, ubw, g = [], [], [], [], []
    a0, b0 = 1.0, 0.0
    x_start = ca.MX.sym("x0", 2)
    w.append(x_start)
    lbw += [a0, b0]
    ubw += [a0, b0]
    w0 += [a0, b0]
    x_k = x_start
    for _ in range(nfe):
        xs, ts = [], []
        for _j in range(ncp):
            x = ca.MX.sym("x", 2)
            T = ca.MX.sym("T")
            w += [x, T]
            lbw += [0.0, 0.0, 298.0]
            ubw += [ca.inf, ca.inf, 398.0]
            w0 += [1.0, 0.0, 350.0]
            xs.append(x)
            ts.append(T)
        points = [x_k, *xs]
        for j in range(1, ncp + 1):
            dx = sum(C[k][j] * points[k] for k in range(ncp + 1))
            a, b = points[j][0], points[j][1]
            k1 = 4000.0 * ca.exp(-2500.0 / ts[j - 1])
            k2 = 6.2e5 * ca.exp(-5000.0 / ts[j - 1])
            g.append(dx - h * ca.vertcat(-k1 * a**2, k1 * a**2 - k2 * b))
        x_k = xs[-1]
    nlp = {"x": ca.vertcat(*w), "f": -x_k[1], "g": ca.vertcat(*g)}
    solver = ca.nlpsol("solver", "ipopt", nlp, {
        "print_time": False, "ipopt": {"print_level": 0, "sb": "yes", "tol": 1e-8, "mumps_permuting_scaling": 0,
                                       "mumps_pivtol": 1e-4, "mu_strategy": "adaptive"}})
    sol = solver(x0=w0, lbx=lbw, ubx=ubw, lbg=0, ubg=0)
    seconds = time.perf_counter() - t0
    if not solver.stats()["success"]:
        raise RuntimeError(f"the compact problem did not converge at {nfe} elements: {solver.stats()['return_status']}")
    return seconds, -float(sol["f"]), int(nlp["x"].numel())


def _times_linear(poly, c):
    """Coefficients of poly(x) * (x + c), lowest power first."""
    out = [0.0] * (len(poly) + 1)
    for i, p in enumerate(poly):
        out[i] += c * p
        out[i + 1] += p
    return out


def tubewright_profile(nfe: int) -> tuple[float, float, int, dict]:
    t0 = time.perf_counter()
    p = DesignProblem(build_case(logsdon_biegler_data(nfe), "a-b-c"))
    p.build(modify=free_temperature_profile(p))
    out = p.solve_nlp(options={"tol": 1e-8})  # as the compact side
    seconds = time.perf_counter() - t0
    if not out.success:
        raise RuntimeError(f"tubewright did not converge at {nfe} elements: {out.message}")
    return seconds, out.objective, p.nlp.times["ipopt_variables"], {"build_s": p.build_s, **out.times}


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [50, 100, 200, 400]
    pairs = 5  # interleaved pairs per size: the machine's speed drifts by tens of per cent within minutes
    compact_casadi(10), tubewright_profile(10)  # warm-up: imports and first-call costs on both sides
    print(f"{'elements':>9}{'compact vars':>14}{'compact s':>11}{'tw vars*':>9}{'tw s':>8}{'ratio':>8}"
          f"{'  (quartiles)':>14}{'  build / compile / IPOPT / callbacks s':>40}{'optimum difference':>20}")
    for nfe in sizes:
        runs = []
        for _ in range(pairs):
            c_s, c_opt, c_n = compact_casadi(nfe)
            t_s, t_opt, t_n, parts = tubewright_profile(nfe)
            runs.append((t_s / c_s, c_s, t_s, parts))
        runs.sort(key=lambda r: r[0])
        ratio, c_s, t_s, parts = runs[len(runs) // 2]  # the median pair
        q1, q3 = np.percentile([r[0] for r in runs], [25, 75])
        detail = (f"{parts['build_s'] - parts['compile_s']:.2f} / {parts['compile_s']:.2f} / "
                  f"{parts['ipopt_s']:.2f} / {parts['callbacks_s']:.2f}")
        print(f"{nfe:>9}{c_n:>14}{c_s:>11.2f}{t_n:>9}{t_s:>8.2f}{ratio:>8.2f}{f'  ({q1:.2f}-{q3:.2f})':>14}"
              f"{detail:>40}{t_opt - c_opt:>20.2e}")
    print("* the variables IPOPT sees after the bridge's presolve (the Pyomo model has twice as many); the median "
          f"of {pairs} interleaved pairs")


if __name__ == "__main__":
    main()
