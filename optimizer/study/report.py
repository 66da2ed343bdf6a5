"""`tubewright status` and `tubewright report`: what a study folder holds, and one self-contained HTML
report (charts embedded as SVG, no network needed) plus a table of the tasks as CSV."""

from __future__ import annotations

import html
import math
from pathlib import Path

from tubewright.models.outcomes import Status
from tubewright.models.units import split_quantity
from tubewright.optimizer.output import svg
from tubewright.optimizer.output.caution import CAUTION
from tubewright.optimizer.output.text import write_records_csv
from tubewright.optimizer.study.store import Store

KEY_FIELDS = ("conversion", "product_selectivity", "max_temperature_K", "pressure_drop_Pa", "production_rate_mol_s")


def read_store(folder):
    store = Store(folder).open(read_only=True)
    try:
        return store.rows(), store.meta()
    finally:
        store.close()


def status(folder) -> dict:
    rows, meta = read_store(folder)
    counts = {}
    for r in rows:
        counts[r["status"]] = counts.get(r["status"], 0) + 1
    return {"study": meta.get("study_path"), "title": meta.get("title"), "counts": counts,
            "tasks": [{"task_id": r["task_id"], "name": r["name"], "kind": r["kind"], "status": r["status"],
                       "reason_code": r["reason_code"] or None, "reason": r["reason"], "seconds": r["seconds"]}
                      for r in rows]}


def _figure_data(folder: Path, row, key: str, table: str, names) -> dict | None:
    """The columns ``names`` of a figure: from the task's summary (written there for the report since the
    summaries carry them), else from its Parquet table (folders of earlier versions); None without either."""
    data = row["summary"].get(key)
    if data is not None:
        return data
    if table not in row["tables"]:
        return None
    import pyarrow.parquet as pq

    return pq.read_table(folder / row["tables"][table], columns=list(names)).to_pydict()


def _axis_values(values) -> tuple[list[float], str]:
    """Swept values (numbers or "number unit" texts) as numbers and the axis unit: the values as written
    when they share one unit; else each converted to the first one's unit when all are quantities of one kind
    (models.units.parse, only then: pint costs 0.1 s); else the numbers as written, without a unit."""
    parsed = [_split(v) for v in values]
    units = {p[1] for p in parsed if p is not None}
    if None not in parsed and len(units) == 1:
        return [p[0] for p in parsed], units.pop()
    as_written = [p[0] if p is not None else math.nan for p in parsed], ""
    from tubewright.models.errors import CaseError
    from tubewright.models.units import parse

    try:
        quantities = [parse(str(v)) for v in values]
    except CaseError:  # a value that is no quantity
        return as_written
    first = quantities[0]
    if any(q.dimensionality != first.dimensionality for q in quantities):
        return as_written
    return [float(q.to(first.units).magnitude) for q in quantities], f"{first.units:~}"


def _split(value):
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value), ""
    return split_quantity(str(value))


def report(folder, out: Path | None = None) -> dict:
    folder = Path(folder)
    rows, meta = read_store(folder)
    out = Path(out) if out else folder / "report.html"
    parts = [f"<h1>{html.escape(meta.get('title', 'study'))}</h1>",
             f"<p class='caution'><b>Caution.</b> {html.escape(CAUTION)}</p>",
             f"<p>Study file: {html.escape(str(meta.get('study_path')))}; {len(rows)} tasks.</p>"]
    table_rows = []
    for r in rows:
        s = r["summary"]
        key = " ".join(f"{k}={s[k]:.5g}" for k in KEY_FIELDS if isinstance(s.get(k), (int, float)))
        if r["kind"] == "optimize" and s.get("objective") is not None:
            key = f"{s.get('goal')} = {s['objective']:.6g}"
        table_rows.append(f"<tr><td>{r['position'] + 1}</td><td>{html.escape(r['name'])}</td><td>{r['kind']}</td>"
                          f"<td class='{r['status']}'>{r['status']}</td><td>{html.escape(str(r['reason'] or ''))}</td>"
                          f"<td>{html.escape(key)}</td><td>{(r['seconds'] or 0):.2f}</td></tr>")
    parts.append("<h2>Tasks</h2><table><tr><th>#</th><th>task</th><th>kind</th><th>status</th><th>reason</th>"
                 "<th>results</th><th>s</th></tr>" + "".join(table_rows) + "</table>")
    groups = {}
    for r in rows:
        if r["group"] and r["status"] == Status.DONE:
            groups.setdefault(r["group"], []).append(r)
    for name, members in groups.items():
        key = next(iter(members[0]["swept"]))
        xs, unit = _axis_values([m["swept"][key] for m in members])
        xlabel = f"{key} [{unit}]" if unit else key
        charts = [svg.chart([{"x": xs, "y": [m["summary"].get(field) for m in members], "mark": "points"}],
                            xlabel=xlabel, ylabel=field, width=360)
                  for field in ("max_temperature_K", "conversion", "pressure_drop_Pa")]
        parts.append(f"<h2>Sweep: {html.escape(name)}</h2><div class='row'>{''.join(charts)}</div>")
    for r in rows:
        if r["status"] != Status.DONE:
            continue
        if r["kind"] == "optimize":
            prof = _figure_data(folder, r, "figure_profile", "profiles", ("z_m", "T_K", "Tc_K"))
            if prof is not None:
                limits = [(lim["bound"], "limit") for lim in r["summary"].get("limits", [])
                          if lim["limit"] == "max_temperature"]
                chart = svg.chart([{"x": prof["z_m"], "y": prof["T_K"], "label": "fluid"},
                                   {"x": prof["z_m"], "y": prof["Tc_K"], "label": "coolant", "dash": True}],
                                  xlabel="z [m]", ylabel="T [K]", hlines=limits, width=520)
                design = ", ".join(f"{k}={v:.5g}" for k, v in r["summary"].get("design", {}).items())
                parts.append(f"<h2>Optimum: {html.escape(r['name'])}</h2><p>{html.escape(design)}</p>" + chart)
        if r["kind"] == "pareto":
            front = _figure_data(folder, r, "front", "front", ("selectivity", "annual_cost_per_year"))
            if front is not None:
                chart = svg.chart([{"x": front["selectivity"], "y": front["annual_cost_per_year"], "mark": "both"}],
                                  xlabel="selectivity", ylabel="annual cost per year", width=440)
                parts.append(f"<h2>Pareto front: {html.escape(r['name'])}</h2>" + chart)
        if r["kind"] == "screen":
            indices = r["summary"].get("indices", {})
            tables = [(k, v) for k, v in indices.items() if "note" not in v]
            if tables:
                key = "ST" if r["summary"].get("method") == "sobol" else "mu_star"
                charts = [svg.bars(list(idx), [v.get(key) or 0.0 for v in idx.values()], title=f"{name} ({key})")
                          for name, idx in tables]
                parts.append(f"<h2>Screening: {html.escape(r['name'])}</h2><div class='row'>{''.join(charts)}</div>")
    style = ("body{font-family:sans-serif;margin:2em;max-width:1100px}table{border-collapse:collapse;font-size:12px}"
             "td,th{border:1px solid #bbb;padding:3px 6px}.caution{background:#fff3cd;padding:8px}"
             ".done{color:#060}.failed,.error,.timeout,.stopped{color:#a00}svg{max-width:100%;height:auto}"
             ".row{display:flex;flex-wrap:wrap;gap:8px}@media print{svg{page-break-inside:avoid}}")
    page = (f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>{html.escape(meta.get('title', ''))}"
            f"</title><style>{style}</style></head><body>{''.join(parts)}</body></html>\n")
    out.write_text(page, encoding="utf-8")
    tasks_csv = folder / "tasks.csv"
    flat = []
    for r in rows:
        flat.append({"task_id": r["task_id"], "name": r["name"], "kind": r["kind"], "status": r["status"],
                     "reason": r["reason"], "seconds": r["seconds"],
                     **{k: r["summary"].get(k) for k in KEY_FIELDS if not isinstance(r["summary"].get(k), dict)},
                     **{f"swept {k}": v for k, v in r["swept"].items()}})
    write_records_csv(tasks_csv, flat)
    return {"report_html": str(out), "tasks_csv": str(tasks_csv), "tasks": len(rows)}
