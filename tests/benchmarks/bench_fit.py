"""Benchmark (a script, not a test): the kinetics fit on the invented two-reaction laboratory case of the demo
(studies/demo/oxidation-lab.toml, 4 free parameters) with 5, 10 and 20 synthetic runs (the demo's invented
"true" kinetics plus seeded noise) at 30 finite elements. Prints the total fit time, the compile time and
the number of forms against the number of runs, and the time of scipy.optimize.least_squares driving the
adaptive integrator on the same problem (same start, same weighted residuals, 2-point Jacobian) with the
ratio (the median of PAIRS interleaved pairs, with their range).

Measured here (2 cores), 2026-12-03, median of three interleaved pairs per line: with the runs' tubes built
on a one-element template repeated by the bridge (nlp.families) and without the output-only states Q and tau,
20 runs: ratio 5.36 (5.05-7.09; fit 0.86 s, least_squares 4.59 s) and 5.92 (5.78-6.27; fit 1.10 s,
least_squares 6.53 s, a slower phase of the machine); 10 runs 8.8-9.5. Earlier the same day, before those two
changes: 20 runs 4.15-5.65 over seven runs of the script (median 4.59), fit 0.96-1.52 s. At 20 runs the fit
now spends 0.03-0.06 s on the start simulations, 0.14-0.22 s building the template, loading the runs and
compiling, 0.5-0.7 s in the estimation (7 IPOPT iterations on 10,924 variables: MUMPS, our callbacks about
0.1 s, and cyipopt and IPOPT receiving about 170,000 Jacobian and 81,000 Hessian values per call, which costs
about 0.1 microseconds per value) and 0.06-0.1 s on the statistics (sensitivities, the mesh check's shared
integration). The fit batches its integrations (models.batch.simulate_profiles: runs that differ only in
feed and coolant conditions share one); the least_squares baseline simulates run by run with simulate, as a
user of the simulator would.

Run: .venv/bin/python tests/benchmarks/bench_fit.py"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "studies" / "demo"))

from make_lab_runs import TRUE_KINETICS  # noqa: E402
from tubewright.models import load_case  # noqa: E402
from tubewright.models.simulator import simulate  # noqa: E402
from tubewright.optimizer.fitting import estimate  # noqa: E402

LAB = ROOT / "studies" / "demo" / "oxidation-lab.toml"


def write_runs(path: Path, n: int, seed: int = 5):
    rng = np.random.default_rng(seed)
    temps = np.linspace(560.0, 620.0, n)
    flows = np.where(np.arange(n) % 2 == 0, 0.001, 0.002)
    rows = ["feed.temperature [K],feed.molar_flow [mol/s],measured.conversion,measured.outlet_flow.C3H4O [mol/s]"]
    for t, f in zip(temps.tolist(), flows.tolist()):
        case = load_case(LAB, {**TRUE_KINETICS, "feed.temperature": f"{t!r} K", "feed.molar_flow": f"{f!r} mol/s"})
        res = simulate(case, checks=False)
        x = float(res.summary["conversion"] + rng.normal(0, 0.005))
        acrolein = float(res.columns["F_C3H4O_mol_s"][-1] * (1 + rng.normal(0, 0.02)))
        rows.append(f"{t!r},{f!r},{x!r},{acrolein!r}")
    path.write_text("\n".join(rows) + "\n")


def least_squares_fit(runs_path: Path):
    """scipy least_squares on the simulator, in the estimator's coordinates (ln k(T_fit), E_a)."""
    from scipy.optimize import least_squares
    from tubewright.optimizer.fitting.data import read_runs
    from tubewright.optimizer.fitting.spec import read_fit
    from tubewright.optimizer.fitting.statistics import arrhenius_reference_temperature

    base = load_case(LAB)
    spec = read_fit(base)
    runs = read_runs(runs_path, LAB)
    t_fit = arrhenius_reference_temperature([r.case.feed.temperature for r in runs])
    theta0 = estimate.start_values(base, spec, t_fit)
    is_k = np.array([p.is_constant for p in spec.parameters])

    def residuals(internal):
        values = estimate.on_rate_constants(internal, is_k, np.exp)
        out = []
        for run in runs:
            names = list(run.measured)
            case = estimate.with_kinetics(run.case, estimate.kinetics_at(run.case, spec, t_fit, values, np))
            pred, _ = estimate.simulate_predictions(case, names)
            if pred is None:
                return np.full(sum(len(r.measured) for r in runs), 1e3)
            out += estimate.weighted_residuals(run, spec, pred)
        return np.array(out)

    start = estimate.on_rate_constants(theta0, is_k, np.log)
    sol = least_squares(residuals, start, x_scale=np.where(is_k, 1.0, np.abs(theta0)), xtol=1e-10, ftol=1e-10)
    return estimate.on_rate_constants(sol.x, is_k, np.exp), sol.nfev


PAIRS = 3  # interleaved (fit, least_squares) pairs per size: the machine's speed drifts within minutes


def main():
    print(f"{'runs':>5}{'fit s':>8}{'compile s':>11}{'forms':>7}{'copies':>9}{'IPOPT it':>10}{'least_sq s':>12}"
          f"{'nfev':>6}{'ratio':>8}{'(range)':>13}   largest relative difference of the estimates; fit phases (s)")
    with tempfile.TemporaryDirectory() as tmp:
        for n in (5, 10, 20):
            runs = Path(tmp) / f"runs{n}.csv"
            write_runs(runs, n)
            pairs = []
            for _ in range(PAIRS):
                t0 = time.perf_counter()
                out = estimate.fit(LAB, runs, nfe=30)
                t_fit = time.perf_counter() - t0
                t0 = time.perf_counter()
                theta_ls, nfev = least_squares_fit(runs)
                t_ls = time.perf_counter() - t0
                pairs.append((t_ls / t_fit, t_fit, t_ls, out, theta_ls, nfev))
            pairs.sort(key=lambda p: p[0])
            ratio, t_fit, t_ls, out, theta_ls, nfev = pairs[len(pairs) // 2]  # the median pair
            spread = f"({pairs[0][0]:.2f}-{pairs[-1][0]:.2f})"
            theta = np.array(list(out.estimates.values()))
            diff = float(np.max(np.abs(theta - theta_ls) / np.abs(theta_ls)))
            s = out.solver
            phases = ", ".join(f"{k} {v:.2f}" for k, v in s["phases_s"].items())
            print(f"{n:>5}{t_fit:>8.2f}{s['times_s']['compile_s']:>11.2f}{s['forms']:>7}{s['copied_runs']:>9}"
                  f"{s['iterations']:>10}{t_ls:>12.2f}{nfev:>6}{ratio:>8.2f}{spread:>13}   {diff:.1e}; {phases}")


if __name__ == "__main__":
    main()
