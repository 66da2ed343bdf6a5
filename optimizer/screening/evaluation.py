"""Evaluating the reactor for every sample: batched integration (stacked states) or one simulation at a
time, on one or more processes; stopped and failed samples are recorded with their reason codes.

The probability of passing counts a runaway sample (stopped at the temperature ceiling) as not passing:
every limit of [limits] is judged by its row of models.limits.
"""

from __future__ import annotations

import signal
import time
from dataclasses import dataclass

import numpy as np
from tubewright.models.batch import OUTPUTS, axial_model, radial_model, simulate_batch, single_outputs
from tubewright.models.limits import LIMITS
from tubewright.models.outcomes import Reason, Status
from tubewright.models.parameters import apply
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
    interrupted: bool = False  # Ctrl-C: the samples not evaluated carry Status.INTERRUPTED


def _batch_task(args):
    case, chunk, size, trap, radial = args
    return simulate_batch(case, chunk, size, trap=trap, model=radial_model(case) if radial else None)


def _worker_start():
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the coordinator's: it ends the workers


def even_slices(n: int, batch_size: int, workers: int) -> list[slice]:
    """Consecutive slices of ``n`` samples of nearly equal size: at least one per worker and none above
    ``batch_size``, their number a multiple of the workers, so that every worker gets the same share
    (a fixed batch of 500 split 512 samples 500 + 12 and left one worker idle)."""
    count = max(1, -(-n // batch_size))
    if workers > 1:
        count = max(count, workers)
        count = -(-count // workers) * workers
    count = min(count, max(n, 1))
    edges = np.linspace(0, n, count + 1).round().astype(int)
    return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]


def evaluate(case, items, unit_x, batch_size: int = 500, batched: bool = True, progress=None,
             trap: float | None = None, workers: int = 1, radial: bool = False) -> Evaluations:
    """Simulate every sample: in batches (stacked states) or one at a time, on ``workers`` processes.
    Counter-current coolant is always one at a time (a shooting per sample). ``trap``: see models.batch
    (default ``_trap(case)``). A batch whose process fails is recorded as failed samples with the reason.
    ``radial``: every sample with the two-dimensional model (models.radial), batched as the 1-D model is
    (models.batch.radial_model); the outputs are its cross-section figures and its hot spot the largest 2-D
    temperature."""
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
    one = (radial_model(case) if radial else axial_model(case)).single  # the one-sample simulation
    done = 0
    evaluated = np.zeros(n, dtype=bool)

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
        evaluated[idx] = True
        if progress is not None:
            progress(done, n, int(np.sum(status != Status.OK)))

    interrupted = False
    try:
        if batched:
            slices = even_slices(n, batch_size, workers)
            tasks = [(case, {p: v[s] for p, v in values.items()}, s.stop - s.start, trap, radial) for s in slices]
            if workers > 1 and len(tasks) > 1:
                _on_pool(tasks, slices, workers, store, status, codes, reason, evaluated)
            else:
                for s, t in zip(slices, tasks):
                    store(s, _batch_task(t))
        else:
            for i in range(n):
                r = one(apply(case, {p: float(v[i]) for p, v in values.items()}))
                for target, flag in ((outputs, False), (censored, True)):
                    for k, v in single_outputs(r, flag).items():
                        target[k][i] = v
                status[i], reason[i], codes[i] = r.status, r.reason, r.reason_code
                evaluated[i] = True
                if progress is not None:
                    progress(i + 1, n, int(np.sum(status[: i + 1] != Status.OK)))
    except KeyboardInterrupt:  # keep what was evaluated; the rest is recorded as interrupted
        interrupted = True
        status[~evaluated] = Status.INTERRUPTED
        codes[~evaluated] = Reason.INTERRUPTED
        for i in np.flatnonzero(~evaluated):
            reason[i] = "interrupted (Ctrl-C) before this sample was evaluated"
    passes = passing(case, outputs, codes)
    outputs.update(passes)
    censored.update(passes)
    present = [k for k, v in censored.items() if not np.all(np.isnan(v))]
    return Evaluations({k: outputs[k] for k in present}, {k: censored[k] for k in present}, status, reason,
                       time.perf_counter() - t0, handed, codes, interrupted)


def _on_pool(tasks, slices, workers, store, status, codes, reason, evaluated, poll: float = 0.1):
    """The batches on a pool of ``workers`` processes (the platform's start method). A batch that could not
    be sent, or whose worker was lost (killed, out of memory: BrokenProcessPool, which also fails the
    batches not yet finished), is recorded as failed samples with the cause; the batches already stored are
    kept and nothing hangs. The workers ignore Ctrl-C; on Ctrl-C the coordinator kills
    the workers this pool started (the children it did not have before) and re-raises, so that the caller
    keeps the batches already stored."""
    import multiprocessing
    import pickle
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    before = {p.pid for p in multiprocessing.active_children()}
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=process_context(), initializer=_worker_start)
    try:
        pending = {pool.submit(_batch_task, t): s for s, t in zip(slices, tasks)}
        while pending:
            done, _ = wait(pending, timeout=poll, return_when=FIRST_COMPLETED)  # short waits: Ctrl-C is seen
            for fut in done:
                s = pending.pop(fut)
                try:
                    store(s, fut.result())
                except (BrokenProcessPool, pickle.PicklingError) as err:  # lost worker or unsendable batch
                    status[s] = Status.FAILED
                    codes[s] = Reason.BATCH_FAILED
                    reason[s] = [f"batch process failed: {err!r}"] * (s.stop - s.start)
                    evaluated[s] = True
    except KeyboardInterrupt:
        for child in multiprocessing.active_children():
            if child.pid not in before:
                child.kill()
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


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
