"""Executing one concrete study task (in a worker process or on a Dask worker). Returns plain data:
status, reason, summary (JSON-able) and tables (column dicts, written to Parquet by the coordinator)."""

from __future__ import annotations

import time
import traceback


def execute(spec: dict) -> dict:
    """Run a task spec (see study.Task.spec). Never raises: an exception becomes status "error" with its
    reason and the last lines of its traceback."""
    t0 = time.perf_counter()
    try:
        out = _run(spec)
    except Exception as err:  # isolation: one task's failure is recorded, the batch goes on
        tb = traceback.format_exc().strip().splitlines()[-3:]
        out = {"status": "error", "reason": f"{type(err).__name__}: {err} | {' / '.join(tb)}", "summary": {},
               "tables": {}}
    out["seconds"] = time.perf_counter() - t0
    return out


def _run(spec) -> dict:
    from tubewright.models.casefile import build_case

    case = build_case(spec["case_data"], spec["case_source"])
    kind, opts = spec["kind"], spec["options"]
    if kind == "simulate":
        from tubewright.models.simulator import simulate

        r = simulate(case)
        summary = dict(r.summary)
        summary["findings"] = [f.as_dict() for f in r.findings]
        return {"status": "done" if r.ok else r.status, "reason": r.reason, "summary": summary,
                "tables": {"profiles": r.columns}}
    if kind == "optimize":
        from tubewright.optimizer.design.problem import optimise

        res = optimise(case)
        summary = res.as_dict()
        if opts.get("starts"):
            from tubewright.optimizer.design.alternatives import multistart

            ms = multistart(case, opts["starts"], opts.get("seed", 0))
            summary["multistart"] = {k: ms[k] for k in ("seed", "starts", "converged", "best", "spread")}
        if opts.get("ideal") and res.ok:
            from tubewright.optimizer.design.ideal import ideal_bound

            b = ideal_bound(case)
            summary["ideal_bound"] = {"objective": b["objective"], "status": b["status"]}
        tables = {"profiles": res.simulation.columns} if res.simulation is not None else {}
        status = "done" if res.status in ("optimal", "not_optimised") else "failed"
        return {"status": status, "reason": res.reason, "summary": summary, "tables": tables}
    if kind == "pareto":
        from tubewright.optimizer.design.alternatives import pareto_front

        front = pareto_front(case, opts["points"])
        pts = front["points"]
        table = {"selectivity": [p["selectivity"] for p in pts],
                 "annual_cost_per_year": [p["annual_cost_per_year"] for p in pts],
                 "status": [p["status"] for p in pts]}
        ok = all(p["status"] == "optimal" for p in pts)
        return {"status": "done" if ok else "failed", "reason": "front traced" if ok else "some points failed",
                "summary": {"cheapest": front["cheapest"], "most_selective": front["most_selective"]},
                "tables": {"front": table}}
    if kind == "screen":
        from tubewright.optimizer.screening.report import as_json
        from tubewright.optimizer.screening.screen import screen

        res = screen(case, opts["method"], opts["samples"], opts["seed"], opts["policy"], workers=1)
        return {"status": "done", "reason": f"{opts['method']} screening", "summary": as_json(res),
                "tables": {"samples": res.samples.to_dict("list"),
                           "outputs": res.outputs.drop(columns=["reason"]).to_dict("list")}}
    raise ValueError(f"unknown task kind {kind}")
