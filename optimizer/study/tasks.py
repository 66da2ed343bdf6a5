"""Executing one concrete study task (in a worker process or on a Dask worker) through the same verbs as
the command line (optimizer.verbs). Returns plain data: status, reason code and reason, summary
(JSON-able) and tables (column dicts, written to Parquet by the coordinator)."""

from __future__ import annotations

import pickle
import subprocess
import sys
import time
import traceback

from tubewright.models.casefile import build_case
from tubewright.models.outcomes import Reason, Status
from tubewright.optimizer import verbs
from tubewright.optimizer.screening.report import as_json


def execute(spec: dict) -> dict:
    """Run a task spec (see study.spec.Task.spec). Never raises: an exception becomes status ERROR with its
    reason and the last lines of its traceback."""
    t0 = time.perf_counter()
    try:
        out = _run(spec)
    except Exception as err:  # isolation: one task's failure is recorded, the batch goes on
        tb = traceback.format_exc().strip().splitlines()[-3:]
        out = failure(Status.ERROR, Reason.EXCEPTION, f"{type(err).__name__}: {err} | {' / '.join(tb)}")
    out["seconds"] = time.perf_counter() - t0
    return out


def execute_limited(spec: dict, timeout: float | None) -> dict:
    """Run ``execute`` in a child process of this one and stop it at ``timeout`` seconds from its own start.
    For Dask workers: the limit then counts the task's running time wherever and whenever it runs (not its
    time in the queue), and a task past its limit is really stopped. A subprocess (not multiprocessing,
    which daemonic Dask workers may not use) reads the pickled spec on stdin and writes the result."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "tubewright.optimizer.study.tasks"], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
    try:
        out, _ = proc.communicate(pickle.dumps(spec), timeout=timeout)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        return failure(Status.TIMEOUT, Reason.TIME_LIMIT, f"exceeded its time limit of {timeout:g} s (stopped on "
                       "its worker)", time.perf_counter() - t0)
    if proc.returncode != 0 or not out:
        return failure(Status.ERROR, Reason.WORKER_LOST, f"task process ended without a result (exit code "
                       f"{proc.returncode})", time.perf_counter() - t0)
    return pickle.loads(out)


def failure(status: Status, code: Reason, reason: str, seconds: float | None = None) -> dict:
    """The record of a task that produced nothing."""
    out = {"status": status, "reason_code": code, "reason": reason, "summary": {}, "tables": {}}
    if seconds is not None:
        out["seconds"] = seconds
    return out


def _run(spec) -> dict:
    case = build_case(spec["case_data"], spec["case_source"])
    kind, opts = spec["kind"], spec["options"]
    if kind == "simulate":
        r = verbs.simulate(case)
        summary = dict(r.summary)
        summary["findings"] = [f.as_dict() for f in r.findings]
        return {"status": Status.DONE if r.ok else r.status, "reason_code": r.reason_code, "reason": r.reason,
                "summary": summary, "tables": {"profiles": r.columns}}
    if kind == "optimize":
        res = verbs.optimize(case, ideal=opts.get("ideal", False), starts=opts.get("starts") or None,
                             seed=opts.get("seed", 0))
        tables, summary = {}, res.as_dict()
        if res.simulation is not None and res.simulation.columns:
            tables["profiles"] = res.simulation.columns
            # the report's figure, so that it needs no Parquet reader
            summary["figure_profile"] = {k: res.simulation.columns[k] for k in ("z_m", "T_K", "Tc_K")}
        done = res.status in (Status.OPTIMAL, Status.NOT_OPTIMISED)
        return {"status": Status.DONE if done else res.status, "reason_code": res.reason_code,
                "reason": res.reason, "summary": summary, "tables": tables}
    if kind == "robust":
        res = verbs.optimize(case, seed=opts["seed"], scenarios=opts["scenarios"],
                             verify_samples=opts["verify_samples"])
        robust = res.extras.get("robust", {})
        ok = res.ok and robust.get("status") == Status.OPTIMAL
        # the hot spots of the verification samples go to a table, not into the summary
        hot = {label: v.pop("hot_spot_samples_K", []) for label, v in robust.get("verification", {}).items()}
        price = robust.get("price_percent")
        return {"status": Status.DONE if ok else Status.FAILED,
                "reason_code": Reason.COMPLETED if ok else Reason.SOLVER_FAILED,
                "reason": (f"robust design over {opts['scenarios']} scenarios"
                           + (f", price of robustness {price:.3g} %" if price is not None else "")) if ok
                else robust.get("reason", res.reason),
                "summary": res.as_dict(),
                "tables": {f"hot_spots_{label}": {"max_temperature_K": v} for label, v in hot.items()}}
    if kind == "pareto":
        front = verbs.pareto(case, opts["points"])
        pts = front["points"]
        table = {"selectivity": [p["selectivity"] for p in pts],
                 "annual_cost_per_year": [p["annual_cost_per_year"] for p in pts],
                 "status": [p["status"] for p in pts]}
        apart = front["not_converged"]  # kept out of the front table, counted in the reason
        ok = not apart
        return {"status": Status.DONE if ok else Status.FAILED,
                "reason_code": Reason.COMPLETED if ok else Reason.PARTLY_FAILED,
                "reason": "front traced" if ok else f"{len(apart)} of {len(pts) + len(apart)} points did not converge "
                "(kept out of the front)",
                "summary": {"cheapest": front["cheapest"], "most_selective": front["most_selective"],
                            "not_converged": apart, "front": {k: table[k] for k in ("selectivity",
                                                                                   "annual_cost_per_year")}},
                "tables": {"front": table}}
    if kind == "screen":
        res = verbs.screen(case, opts["method"], opts["samples"], opts["seed"], opts["policy"], workers=1)
        return {"status": Status.DONE, "reason_code": Reason.COMPLETED, "reason": f"{opts['method']} screening",
                "summary": as_json(res), "tables": {"samples": res.samples.to_dict("list"),
                                                     "outputs": res.outputs.drop(columns=["reason"]).to_dict("list")}}
    raise ValueError(f"unknown task kind {kind}")


if __name__ == "__main__":  # the child of execute_limited: a pickled spec in, a pickled result out
    sys.stdout.buffer.write(pickle.dumps(execute(pickle.loads(sys.stdin.buffer.read()))))
