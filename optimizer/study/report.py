"""`tubewright status` and `tubewright report`: what a study folder holds, and one self-contained HTML
report (plots embedded as PNG data, no network needed) plus tables for pandas."""

from __future__ import annotations

import base64
import html
import io
from pathlib import Path

from tubewright.models.outcomes import Status
from tubewright.optimizer.output.canvas import new_figure
from tubewright.optimizer.output.caution import CAUTION
from tubewright.optimizer.output.text import plain, safe_frame
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


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90)
    return f'<img alt="plot" src="data:image/png;base64,{base64.b64encode(buf.getvalue()).decode()}">'


def _number(text):
    from tubewright.models.units import registry

    if isinstance(text, (int, float)):
        return float(text), ""
    q = registry().Quantity(text)
    return float(q.magnitude), f"{q.units:~}"


def report(folder, out: Path | None = None) -> dict:
    import pandas as pd

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
        xs, unit = zip(*(_number(m["swept"][key]) for m in members))
        fig = new_figure((12, 3.4))
        axes = fig.subplots(1, 3)
        for ax, field in zip(axes, ("max_temperature_K", "conversion", "pressure_drop_Pa")):
            ys = [m["summary"].get(field) for m in members]
            ax.plot(xs, ys, "o")
            ax.set_xlabel(plain(f"{key} [{unit[0]}]" if unit[0] else key))
            ax.set_ylabel(field)
        fig.suptitle(plain(f"sweep: {name}"), fontsize=9)
        fig.tight_layout()
        parts.append(f"<h2>Sweep: {html.escape(name)}</h2>" + _png(fig))
    for r in rows:
        if r["status"] != Status.DONE:
            continue
        if r["kind"] in ("optimize", "simulate") and "profiles" in r["tables"] and r["kind"] == "optimize":
            prof = pd.read_parquet(folder / r["tables"]["profiles"])
            fig = new_figure((6, 3.2))
            ax = fig.subplots()
            ax.plot(prof["z_m"], prof["T_K"], label="fluid")
            ax.plot(prof["z_m"], prof["Tc_K"], "--", label="coolant")
            for lim in r["summary"].get("limits", []):
                if lim["limit"] == "max_temperature":
                    ax.axhline(lim["bound"], color="red", ls=":", label="limit")
            ax.set_xlabel("z [m]")
            ax.set_ylabel("T [K]")
            ax.legend(fontsize=7)
            fig.tight_layout()
            design = ", ".join(f"{k}={v:.5g}" for k, v in r["summary"].get("design", {}).items())
            parts.append(f"<h2>Optimum: {html.escape(r['name'])}</h2><p>{html.escape(design)}</p>" + _png(fig))
        if r["kind"] == "pareto" and "front" in r["tables"]:
            front = pd.read_parquet(folder / r["tables"]["front"])
            fig = new_figure((5, 3.2))
            ax = fig.subplots()
            ax.plot(front["selectivity"], front["annual_cost_per_year"], "o-")
            ax.set_xlabel("selectivity")
            ax.set_ylabel("annual cost per year")
            fig.tight_layout()
            parts.append(f"<h2>Pareto front: {html.escape(r['name'])}</h2>" + _png(fig))
        if r["kind"] == "screen":
            indices = r["summary"].get("indices", {})
            tables = [(k, v) for k, v in indices.items() if "note" not in v]
            if tables:
                fig = new_figure((3.2 * len(tables), 3.2))
                axes = fig.subplots(1, len(tables), squeeze=False)
                key = "ST" if r["summary"].get("method") == "sobol" else "mu_star"
                for ax, (name, idx) in zip(axes[0], tables):
                    ax.barh([plain(f) for f in idx], [v.get(key) or 0.0 for v in idx.values()])
                    ax.set_title(plain(f"{name} ({key})"), fontsize=8)
                    ax.tick_params(labelsize=7)
                fig.tight_layout()
                parts.append(f"<h2>Screening: {html.escape(r['name'])}</h2>" + _png(fig))
    style = ("body{font-family:sans-serif;margin:2em;max-width:1100px}table{border-collapse:collapse;font-size:12px}"
             "td,th{border:1px solid #bbb;padding:3px 6px}.caution{background:#fff3cd;padding:8px}"
             ".done{color:#060}.failed,.error,.timeout,.stopped{color:#a00}img{max-width:100%}"
             "@media print{img{page-break-inside:avoid}}")
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
    safe_frame(pd.DataFrame(flat)).to_csv(tasks_csv, index=False)
    return {"report_html": str(out), "tasks_csv": str(tasks_csv), "tasks": len(rows)}
