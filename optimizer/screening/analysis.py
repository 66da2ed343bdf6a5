"""Sensitivity screening: a small functional core (problem -> samples -> evaluations -> indices) and a thin
wrapper (``screen``). SALib samples the unit hypercube and computes the indices; the project maps samples
to parameter values and evaluates the reactor (batched).

Seeds: an int (0 is a seed like any other). SALib gets fresh numpy Generators derived from it, never a bare
int, so its ``if seed:`` test cannot turn seed 0 into "no seed".

Failed samples (a simulation that stops): counted and listed per output with their inputs. Policy
``censor`` (default): a stopped sample contributes its values where it stopped (a runaway's hot spot is the
temperature ceiling it passed, a lower bound of the truth), so every output is analysed; the result says how
many samples are censored. Policy ``strict``: an output with any failed sample gets no indices. A sample
whose integration failed outright has no values under either policy (its outputs are not analysed, and the
message says so). The probability of passing the hot-spot limit counts a runaway
sample as not passing.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
from tubewright.optimizer.screening.sampling import MORRIS_LEVELS, rng_for, sample, to_parameters
from tubewright.optimizer.screening.uncertain import salib_problem

METHODS = ("morris", "sobol")
POLICIES = ("censor", "strict")  # the first is the default of every caller
DEFAULT_SAMPLES = {"morris": 20, "sobol": 1024}  # Morris trajectories or Sobol base samples, for every verb
MAX_SAMPLES = {"morris": 10_000, "sobol": 2**18}  # beyond these a screening of a reactor takes days


def check_samples(method: str, n) -> str | None:
    """Why ``n`` is not an allowed number of Morris trajectories or Sobol base samples, or None. Sobol
    sequences balance only at powers of two (SALib's Saltelli/Sobol sampling), so other counts are refused."""
    if isinstance(n, bool) or not isinstance(n, int):
        return f"must be a whole number, got {n!r}"
    if not 2 <= n <= MAX_SAMPLES[method]:
        return f"must be from 2 to {MAX_SAMPLES[method]} for {method}, got {n}"
    if method == "sobol" and n & (n - 1):
        return f"Sobol base samples must be a power of two (the sequence balances only there), got {n}"
    return None


def analyse(problem, method, unit_x, y, seed: int) -> dict:
    """Indices of one output: Morris mu*, sigma (and mu*'s interval) or Sobol S1, ST with bootstrap intervals."""
    if method == "sobol":
        from SALib.analyze import sobol

        r = sobol.analyze(problem, y, calc_second_order=False, num_resamples=200, conf_level=0.95,
                          seed=rng_for(seed, 2), print_to_console=False)
        return {"S1": r["S1"], "S1_conf": r["S1_conf"], "ST": r["ST"], "ST_conf": r["ST_conf"]}
    from SALib.analyze import morris

    r = morris.analyze(problem, unit_x, y, num_resamples=200, conf_level=0.95, num_levels=MORRIS_LEVELS,
                       seed=rng_for(seed, 2), print_to_console=False)
    return {"mu_star": np.asarray(r["mu_star"]), "mu_star_conf": np.asarray(r["mu_star_conf"]),
            "sigma": np.asarray(r["sigma"]), "mu": np.asarray(r["mu"])}


def factor_names(problem) -> list[str]:
    if "groups" in problem:
        seen = []
        for g in problem["groups"]:
            if g not in seen:
                seen.append(g)
        return seen
    return list(problem["names"])


def rows_for(problem, method, n_sub: int) -> int:
    d = len(factor_names(problem))
    return n_sub * (d + 2) if method == "sobol" else n_sub * (d + 1)


MIN_STAGE = 4  # base samples (trajectories) at the smallest stage of the convergence check (our choice)


def clopper_pearson(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """The exact (Clopper and Pearson, Biometrika 26, 1934, 404-413) interval of a binomial proportion k/n."""
    from scipy.stats import beta

    alpha = 1.0 - confidence
    low = 0.0 if k == 0 else float(beta.ppf(alpha / 2, k, n - k + 1))
    high = 1.0 if k == n else float(beta.ppf(1 - alpha / 2, k + 1, n - k))
    return low, high


def random_rows(problem, method: str, size: int):
    """The rows of a design that sample the input distribution: the A and B rows of Sobol's design
    (quasi-random, independent of each other's columns). Morris trajectories sit on a grid that covers the
    tails evenly by design, so they sample no distribution: None."""
    if method != "sobol":
        return None
    block = len(factor_names(problem)) + 2
    return np.sort(np.concatenate([np.arange(0, size, block), np.arange(block - 1, size, block)]))


def random_values(problem, method: str, y):
    """The finite values of an output on the rows that sample the input distribution (``random_rows``), or
    None with Morris or when none is finite."""
    y = np.asarray(y, dtype=float)
    rows = random_rows(problem, method, y.size)
    if rows is None:
        return None
    values = y[rows]
    values = values[np.isfinite(values)]
    return values if values.size else None


def probability(problem, method: str, y) -> dict | None:
    """The probability that a 0/1 output is 1, estimated only from samples of the input distribution
    (``random_values``), with the exact 95 % interval; None with Morris."""
    values = random_values(problem, method, y)
    if values is None:
        return None
    k, n = int(values.sum()), int(values.size)
    low, high = clopper_pearson(k, n)
    return {"estimate": k / n, "low_95": low, "high_95": high, "samples": n}


def spread(problem, method: str, y) -> dict | None:
    """The 5th, 50th and 95th percentiles of an output over the samples of the input distribution
    (``random_values``; linear interpolation between order statistics, numpy's default) and the number of
    samples behind them; None with Morris, whose trajectories are no sample of the distribution."""
    values = random_values(problem, method, y)
    if values is None:
        return None
    p5, p50, p95 = np.percentile(values, [5.0, 50.0, 95.0])
    return {"p5": float(p5), "p50": float(p50), "p95": float(p95), "samples": int(values.size)}


def convergence(problem, method, unit_x, y, n: int, seed: int) -> dict:
    """Indices from the first N/4 and N/2 base samples (trajectories) against N: the largest change of ST
    (Sobol) or normalised mu* (Morris) between N/2 and N, and whether the ranking of the factors held."""
    key = "ST" if method == "sobol" else "mu_star"
    if n // 4 < MIN_STAGE:
        return {"verdict": f"too few samples to judge (N/4 = {n // 4}; a verdict needs N >= {4 * MIN_STAGE})",
                "history": {}}
    history = {}
    for frac in (4, 2, 1):
        n_sub = n // frac
        if n_sub < 2:
            continue
        rows = rows_for(problem, method, n_sub)
        idx = analyse(problem, method, unit_x[:rows], y[:rows], seed)[key]
        history[n_sub] = np.asarray(idx, dtype=float)
    if len(history) < 2:
        return {"verdict": "not assessed (too few samples)", "history": {}}
    sizes = sorted(history)
    last, prev = history[sizes[-1]], history[sizes[-2]]
    scale = max(np.nanmax(np.abs(last)), 1e-12)
    change = float(np.nanmax(np.abs(last - prev)) / scale)
    important = np.flatnonzero(last >= 0.05 * scale)  # the ranking of factors that matter must hold
    same_order = list(important[np.argsort(-last[important])]) == list(important[np.argsort(-prev[important])])
    verdict = "converged" if change < 0.1 and same_order else "not converged: increase the number of samples"
    return {"verdict": verdict, "largest_relative_change": change, "ranking_unchanged": bool(same_order),
            "history": {int(k): v.tolist() for k, v in history.items()}}


@dataclass
class ScreeningResult:
    method: str
    seed: int
    n: int
    policy: str
    factors: list
    samples: object  # pandas DataFrame: inputs per sample (SI values)
    outputs: object  # pandas DataFrame: outputs and status per sample
    indices: dict = field(default_factory=dict)  # output -> DataFrame of indices per factor, or a reason
    convergence: dict = field(default_factory=dict)
    failures: dict = field(default_factory=dict)  # output -> {"count", "samples": [...]}
    probability_of_passing: dict = field(default_factory=dict)  # output -> probability() (None with Morris)
    spread: dict = field(default_factory=dict)  # output -> spread(): P5/P50/P95 (None with Morris)
    timings: dict = field(default_factory=dict)
    interrupted: bool = False  # Ctrl-C during the evaluations: samples kept, nothing analysed


def run(items, evaluator, method: str = "morris", n: int = 16, seed: int = 0, policy: str = "censor",
        outputs=None) -> ScreeningResult:
    """The functional core: problem from ``items`` -> unit samples (SALib) -> ``evaluator(unit_x)``
    (an Evaluations) -> indices (SALib) and the convergence check, for each output in ``outputs``."""
    import pandas as pd

    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}")
    if policy not in POLICIES:
        raise ValueError(f"failure policy must be one of {POLICIES}")
    problem = salib_problem(items)
    unit_x = sample(problem, method, n, seed)
    ev = evaluator(unit_x)
    values = to_parameters(items, unit_x)
    samples = pd.DataFrame({u.name: values[u.path] for u in items})
    out = pd.DataFrame(ev.outputs)
    out["status"] = ev.status
    out["reason"] = ev.reason
    indices, failures, conv = {}, {}, {}
    factors = factor_names(problem)
    t_analysis = time.perf_counter()
    interrupted = bool(getattr(ev, "interrupted", False))
    for name in outputs or ev.outputs:
        if name not in ev.outputs:
            continue
        if interrupted:  # a design with holes is no Morris or Sobol design: keep the samples, analyse nothing
            done = int(np.sum(ev.status != "interrupted"))
            indices[name] = f"not analysed: interrupted after {done} of {len(ev.status)} samples"
            continue
        y = np.array((ev.censored if policy == "censor" else ev.outputs)[name], dtype=float)
        bad = ~np.isfinite(y)
        if bad.any():
            failures[name] = {"count": int(bad.sum()),
                              "samples": [{"sample": int(i), "reason": ev.reason[i],
                                           **{c: float(samples[c].iloc[i]) for c in samples.columns}}
                                          for i in np.flatnonzero(bad)[:50]]}
            why = ("policy strict; the default policy censor analyses stopped samples with the values where they "
                   "stopped" if policy == "strict" else "their integration failed outright, so no value exists")
            indices[name] = f"not analysed: {int(bad.sum())} of {len(y)} samples failed ({why})"
            continue
        if np.ptp(y) <= 1e-9 * max(np.max(np.abs(y)), 1e-300):  # integrator noise is not variation
            indices[name] = "not analysed: the output does not vary over the samples"
            continue
        res = analyse(problem, method, unit_x, y, seed)
        indices[name] = pd.DataFrame({k: np.asarray(v, dtype=float) for k, v in res.items()}, index=factors)
        conv[name] = convergence(problem, method, unit_x, y, n, seed)
    passing = {} if interrupted else {name: probability(problem, method, ev.outputs[name])
                                      for name in ("passes_hot_spot_limit", "passes_limits") if name in ev.outputs}
    spreads = {} if interrupted else {
        name: spread(problem, method, (ev.censored if policy == "censor" else ev.outputs)[name])
        for name in (outputs or ev.outputs) if name in ev.outputs and not name.startswith("passes_")}
    stopped = int(np.sum(ev.status != "ok"))
    timings = {"evaluate_s": ev.seconds, "stopped_samples": stopped,
               "censored_samples": stopped if policy == "censor" else 0,
               "analyse_s": time.perf_counter() - t_analysis,
               "evaluations": int(unit_x.shape[0]), "evaluations_per_s": unit_x.shape[0] / max(ev.seconds, 1e-9),
               "handed_over": ev.handed_over}
    return ScreeningResult(method, seed, n, policy, factors, samples, out, indices, conv, failures, passing, spreads,
                           timings, interrupted)
