"""The spread of the axial temperature profile over the uncertain inputs: the 5th, 50th and 95th
percentiles of T at each relative position z/L over the samples of the input distribution (Sobol's
quasi-random A and B rows; Morris trajectories sample no distribution and give none). The profiles are
simulated one at a time from the samples the screening drew, at most ``max_samples`` of them, evenly
picked; a sample that stopped (runaway) counts with its ceiling temperature from where it stopped on."""

from __future__ import annotations

import numpy as np
from tubewright.models.parameters import apply
from tubewright.models.simulator import simulate
from tubewright.optimizer.screening.analysis import random_rows
from tubewright.optimizer.screening.uncertain import salib_problem

POINTS = 101  # relative positions z/L


def temperature_envelope(case, items, res, max_samples: int = 200) -> dict | None:
    """{"position": z/L, "p5", "p50", "p95": K, "samples": n} or None (Morris, or no sample simulated)."""
    rows = random_rows(salib_problem(items), res.method, len(res.samples))
    if rows is None:
        return None
    pick = rows[np.unique(np.linspace(0, rows.size - 1, min(max_samples, rows.size)).round().astype(int))]
    x = np.linspace(0.0, 1.0, POINTS)
    profiles = []
    for i in pick:
        moved = apply(case, {u.path: float(res.samples[u.name].iloc[i]) for u in items})
        r = simulate(moved, checks=False)
        if not r.columns:
            continue
        z, t = np.asarray(r.columns["z_m"]), np.asarray(r.columns["T_K"])
        after = t[-1] if r.ok else moved.numerics.temperature_ceiling  # a runaway stays at the ceiling
        profiles.append(np.interp(x * moved.tube.length, z, t, right=after))
    if not profiles:
        return None
    p5, p50, p95 = np.percentile(np.array(profiles), [5.0, 50.0, 95.0], axis=0)
    return {"position": x, "p5": p5, "p50": p50, "p95": p95, "samples": len(profiles)}


def plot_envelope(case, envelope: dict, path):
    """The P5-P95 band and the median of the temperature profile, with the hot-spot limit."""

    from tubewright.optimizer.output.canvas import finish, new_figure
    from tubewright.optimizer.output.text import plain

    fig = new_figure((7.0, 4.2))
    ax = fig.subplots()
    x = envelope["position"]
    ax.fill_between(x, envelope["p5"], envelope["p95"], alpha=0.3, label="P5 to P95")
    ax.plot(x, envelope["p50"], label="median (P50)")
    limit = case.limits.get("max_temperature")
    if limit is not None:
        ax.axhline(limit, color="red", lw=0.8, ls=":", label="temperature limit")
    ax.set_xlabel("relative position z/L [-]")
    ax.set_ylabel("temperature [K]")
    ax.set_title(plain(f"{case.title}\nspread of the temperature profile over {envelope['samples']} samples"),
                 fontsize=8)
    ax.legend(fontsize=8)
    return finish(fig, path)
