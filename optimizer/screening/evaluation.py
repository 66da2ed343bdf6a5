"""Evaluating the reactor for every sample: batched integration (stacked states) or one simulation at a
time, on one or more processes; stopped and failed samples are recorded with their reason codes.

The probability of passing counts a runaway sample (stopped at the temperature ceiling) as not passing:
every limit of [limits] is judged by its row of models.limits.
"""

from __future__ import annotations

import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass

import numpy as np
from tubewright.models.batch import OUTPUTS, simulate_batch, single_outputs
from tubewright.models.limits import LIMITS
from tubewright.models.outcomes import Reason, Status
from tubewright.models.parameters import apply
from tubewright.models.simulator import simulate
from tubewright.optimizer.processes import process_context
from tubewright.optimizer.screening.sampling import to_parameters


@dataclass
class Evaluations:
    outputs: dict  # name -> array per sample
    censored: dict  # the same, with the values where stopped samples stopped
    status: np.ndarray
    reason: list
    seconds: float
    handed_over: int = 0
    codes: np.ndarray = None  # Reason per sample


def _batch_task(args):
    case, chunk, size, trap = args
    return simulate_batch(case, chunk, size, trap=trap)


def evaluate(case, items, unit_x, batch_size: int = 500, batched: bool = True, progress=None,
             trap: float | None = None, workers: int = 1) -> Evaluations:
    """Simulate every sample: in batches (stacked states) or one at a time, on ``workers`` processes.
    Counter-current coolant is always one at a time (a shooting per sample). ``trap``: see models.batch
    (default ``_trap(case)``). A batch whose process fails is recorded as failed samples with the reason."""
    t0 = time.perf_counter()
    trap = _trap(case) if trap is None else trap
    values = to_parameters(items, unit_x)
    n = unit_x.shape[0]
    outputs = {k: np.full(n, np.nan) for k in OUTPUTS}
    censored = {k: np.full(n, np.nan) for k in OUTPUTS}
    status = np.array([Status.OK] * n, dtype=object)
    codes = np.array([Reason.INTEGRATED] * n, dtype=object)
    reason = [""] * n
    handed = 0
    if not case.coolant.kind.batchable:
        batched = False
    done = 0

    def store(idx, res):
        nonlocal handed, done
        for k in OUTPUTS:
            if k in res.outputs:
                outputs[k][idx] = res.outputs[k]
                censored[k][idx] = res.censored[k]
        status[idx] = res.status
        codes[idx] = res.reason_code
        reason[idx] = res.reason
        handed += res.handed_over
        done += idx.stop - idx.start
        if progress is not None:
            progress(done, n, int(np.sum(status != Status.OK)))

    if batched:
        slices = [slice(a, min(a + batch_size, n)) for a in range(0, n, batch_size)]
        tasks = [(case, {p: v[s] for p, v in values.items()}, s.stop - s.start, trap) for s in slices]
        if workers > 1 and len(tasks) > 1:
            with ProcessPoolExecutor(max_workers=workers, mp_context=process_context()) as pool:
                futures = [pool.submit(_batch_task, t) for t in tasks]
                for s, fut in zip(slices, futures):
                    try:
                        store(s, fut.result())
                    except Exception as err:  # a lost worker must not lose the other batches
                        status[s] = Status.FAILED
                        codes[s] = Reason.BATCH_FAILED
                        reason[s] = [f"batch process failed: {err!r}"] * (s.stop - s.start)
                        done += s.stop - s.start
        else:
            for s, t in zip(slices, tasks):
                store(s, _batch_task(t))
    else:
        for i in range(n):
            r = simulate(apply(case, {p: float(v[i]) for p, v in values.items()}), checks=False)
            for target, flag in ((outputs, False), (censored, True)):
                for k, v in single_outputs(r, flag).items():
                    target[k][i] = v
            status[i], reason[i], codes[i] = r.status, r.reason, r.reason_code
            if progress is not None:
                progress(i + 1, n, int(np.sum(status[: i + 1] != Status.OK)))
    passes = passing(case, outputs, codes)
    outputs.update(passes)
    censored.update(passes)
    present = [k for k, v in censored.items() if not np.all(np.isnan(v))]
    return Evaluations({k: outputs[k] for k in present}, {k: censored[k] for k in present}, status, reason,
                       time.perf_counter() - t0, handed, codes)


def passing(case, outputs: dict, codes) -> dict:
    """Per sample, 1.0 where a limit is kept and 0.0 where it is not, NaN where the figure is unknown (a
    failed sample): ``passes_hot_spot_limit`` for limits.max_temperature and ``passes_limits`` for every
    limit of [limits] together. A runaway (stopped at the temperature ceiling) passes nothing."""
    if not case.limits:
        return {}
    runaway = np.array([c == Reason.TEMPERATURE_CEILING for c in codes])
    each = {}
    for name, bound in case.limits.items():
        value = outputs[LIMITS[name].figure]
        each[name] = np.where(runaway, 0.0, np.where(np.isfinite(value), LIMITS[name].passes(value, bound), np.nan))
    every = np.stack(list(each.values()))
    out = {"passes_limits": np.where(np.isnan(every).any(axis=0), np.nan, every.min(axis=0))}
    out["passes_limits"] = np.where(runaway, 0.0, out["passes_limits"])
    if "max_temperature" in each:
        out["passes_hot_spot_limit"] = each["max_temperature"]
    return out


def function_evaluator(items, fn):
    """An evaluator for a plain function ``fn({path: values}) -> {output: values}`` (vectorised)."""

    def evaluator(unit_x):
        t0 = time.perf_counter()
        result = {k: np.asarray(v, dtype=float) for k, v in fn(to_parameters(items, unit_x)).items()}
        n = unit_x.shape[0]
        status = np.array([Status.OK] * n, dtype=object)
        codes = np.array([Reason.INTEGRATED] * n, dtype=object)
        return Evaluations(result, result, status, [""] * n, time.perf_counter() - t0, 0, codes)

    return evaluator


def _trap(case) -> float:
    """Samples passing this temperature leave the batch (simulated on their own): 60 K above the hot-spot
    limit, or 150 K above the feed and coolant temperatures without one (our choice; it affects speed only)."""
    limit = case.limits.get("max_temperature")
    if limit is not None:
        return limit + 60.0
    return max(case.feed.temperature, case.coolant.temperature or 0.0) + 150.0
