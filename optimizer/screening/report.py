"""Tables, files and plots of a screening result."""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np
from tubewright.optimizer.output.canvas import finish, new_figure
from tubewright.optimizer.output.text import plain, safe_frame


def ranking_lines(res) -> list[str]:
    lines = []
    key = "ST" if res.method == "sobol" else "mu_star"
    for name, idx in res.indices.items():
        lines.append(f"\n{name}:")
        sp = res.spread.get(name)
        if sp is not None:
            lines.append(f"  spread over {sp['samples']} quasi-random samples: P5 {sp['p5']:.6g}, P50 "
                         f"{sp['p50']:.6g}, P95 {sp['p95']:.6g}")
        elif name in res.spread:
            lines.append("  spread: not estimated (Morris trajectories are no sample of the input distribution; "
                         "use --method sobol)")
        if isinstance(idx, str):
            lines.append(f"  {idx}")
            continue
        order = idx.sort_values(key, ascending=False)
        if res.method == "sobol":
            lines.append(f"  {'factor':<24}{'S1':>9}{'+-':>8}{'ST':>9}{'+-':>8}")
            for f, r in order.iterrows():
                lines.append(f"  {f:<24}{r['S1']:>9.3f}{r['S1_conf']:>8.3f}{r['ST']:>9.3f}{r['ST_conf']:>8.3f}")
        else:
            lines.append(f"  {'factor':<24}{'mu*':>12}{'+-':>11}{'sigma':>12}")
            for f, r in order.iterrows():
                lines.append(f"  {f:<24}{r['mu_star']:>12.4g}{r['mu_star_conf']:>11.3g}{r['sigma']:>12.4g}")
        conv = res.convergence.get(name)
        if conv:
            lines.append(f"  convergence (N/4, N/2, N): {conv['verdict']}"
                         + (f", largest change {conv['largest_relative_change']:.3f}" if "largest_relative_change"
                            in conv else ""))
    return lines


def as_json(res) -> dict:
    def table(idx):
        if isinstance(idx, str):
            return {"note": idx}
        return {f: {k: float(v) for k, v in row.items()} for f, row in idx.iterrows()}  # NaN: see jsonsafe

    return {"method": res.method, "seed": res.seed, "samples": res.n, "evaluations": len(res.outputs),
            "interrupted": res.interrupted,
            "failure_policy": res.policy, "factors": res.factors,
            "indices": {k: table(v) for k, v in res.indices.items()},
            "convergence": {k: {kk: vv for kk, vv in v.items() if kk != "history"} for k, v in res.convergence.items()},
            "failures": res.failures, "probability_of_passing": res.probability_of_passing, "spread": res.spread,
            "timings": res.timings}


def write_files(res, out: Path) -> dict:
    out.mkdir(parents=True, exist_ok=True)
    files = {"samples_csv": out / "samples.csv", "outputs_csv": out / "outputs.csv", "indices_csv": out / "indices.csv"}
    safe_frame(res.samples).to_csv(files["samples_csv"], index_label="sample")
    safe_frame(res.outputs).to_csv(files["outputs_csv"], index_label="sample")
    rows = []
    for name, idx in res.indices.items():
        if isinstance(idx, str):
            continue
        for f, r in idx.iterrows():
            rows += [{"output": name, "factor": f, "index": k, "value": float(v)} for k, v in r.items()]
    import pandas as pd

    safe_frame(pd.DataFrame(rows, columns=["output", "factor", "index", "value"])).to_csv(files["indices_csv"],
                                                                                      index=False)
    try:  # Parquet when a Parquet engine is installed (pyarrow or fastparquet); CSV is always written
        for name in ("samples", "outputs"):
            frame = res.samples if name == "samples" else res.outputs
            frame.to_parquet(out / f"{name}.parquet")
            files[f"{name}_parquet"] = out / f"{name}.parquet"
    except ImportError:
        pass
    files["plot_png"] = plot(res, out / f"{res.method}.png")
    return {k: str(v) for k, v in files.items()}


def plot(res, path: Path) -> Path:
    """One panel per output: Morris mu* against sigma (a group of factors has no sigma in SALib, so it is
    drawn on the axis with an open marker and said so), or Sobol S1 and ST bars with their 95 % intervals
    (values above 1, an estimation artefact, are written out with their interval). An output that was not
    analysed keeps its panel, which says why."""
    panels = list(res.indices.items())
    cols = max(1, min(3, len(panels)))
    rows = max(1, math.ceil(len(panels) / cols))
    fig = new_figure((5.0 * cols, 3.8 * rows))
    axes = fig.subplots(rows, cols, squeeze=False)
    for ax, (name, idx) in zip(axes.ravel(), panels):
        ax.set_title(plain(name), fontsize=9)
        if isinstance(idx, str):
            ax.axis("off")
            ax.text(0.5, 0.5, plain(textwrap.fill(idx, 40)), ha="center", va="center", fontsize=8,
                    transform=ax.transAxes)
            continue
        if res.method == "morris":
            _morris_panel(ax, idx)
        else:
            _sobol_panel(ax, idx)
    for ax in axes.ravel()[len(panels):]:
        ax.axis("off")
    return finish(fig, path, dpi=100)


def _morris_panel(ax, idx):
    sigma = np.asarray(idx["sigma"], dtype=float)
    known = np.isfinite(sigma)
    ax.errorbar(idx["mu_star"][known], sigma[known], xerr=idx["mu_star_conf"][known], fmt="o", ms=4, capsize=2)
    if (~known).any():
        ax.errorbar(idx["mu_star"][~known], np.zeros((~known).sum()), xerr=idx["mu_star_conf"][~known], fmt="o",
                    mfc="none", ms=6, capsize=2, label="group (sigma not defined)")
        ax.legend(fontsize=7)
    for (f, r), ok in zip(idx.iterrows(), known):
        ax.annotate(plain(f), (r["mu_star"], r["sigma"] if ok else 0.0), fontsize=7, xytext=(3, 3),
                    textcoords="offset points")
    ax.set_xlabel("mu*")
    ax.set_ylabel("sigma")


def _sobol_panel(ax, idx):
    x = np.arange(len(idx))
    ax.bar(x - 0.2, idx["S1"], 0.4, yerr=idx["S1_conf"], capsize=2, label="S1")
    ax.bar(x + 0.2, idx["ST"], 0.4, yerr=idx["ST_conf"], capsize=2, label="ST")
    ax.set_xticks(x, [plain(f) for f in idx.index], rotation=45, ha="right", fontsize=7)
    top = float(np.nanmax(np.concatenate([idx["S1"] + idx["S1_conf"], idx["ST"] + idx["ST_conf"], [1.0]])))
    ax.set_ylim(min(0.0, float(np.nanmin(idx["S1"] - idx["S1_conf"]))), 1.08 * top)
    ax.axhline(1.0, color="gray", lw=0.6, ls=":")
    for k, (_, r) in enumerate(idx.iterrows()):
        for dx, key in ((-0.2, "S1"), (0.2, "ST")):
            if r[key] > 1.0:
                ax.annotate(f"{r[key]:.2f}+-{r[key + '_conf']:.2f}", (k + dx, r[key]), fontsize=6, ha="center",
                            xytext=(0, 3), textcoords="offset points")
    ax.legend(fontsize=7)
