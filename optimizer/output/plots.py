"""Plots: the axial profiles of a simulation (temperatures, conversion, pressure), the cost-selectivity front
and the hot-spot distributions of a robust design."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from tubewright.optimizer.output.canvas import finish, new_figure
from tubewright.optimizer.output.text import plain


def plot_profiles(case, result, path: Path, limits=None) -> Path:
    """Temperature, conversion and pressure along the tube; ``limits`` (optimisation LimitRows) are drawn in."""
    cols = result.columns
    z = cols["z_m"]
    fig = new_figure((7.0, 8.0))
    axes = fig.subplots(3, 1, sharex=True)
    ax = axes[0]
    ax.plot(z, cols["T_K"], label="fluid")
    if case.coolant.kind.exchanges_heat:
        ax.plot(z, cols["Tc_K"], "--", label="coolant")
    t_limit = case.limits.get("max_temperature")
    for row in limits or []:
        if row.name == "max_temperature":
            t_limit = row.bound
    if t_limit is not None:
        ax.axhline(t_limit, color="red", lw=0.8, ls=":", label="temperature limit")
    ax.set_ylabel("temperature [K]")
    ax.legend(loc="best", fontsize=8)
    axes[1].plot(z, cols["conversion"])
    axes[1].set_ylabel(plain(f"conversion of {case.key_reactant} [-]"))
    axes[2].plot(z, cols["P_Pa"] / 1e5)
    for row in limits or []:
        if row.name == "max_pressure_drop":
            axes[2].axhline((cols["P_Pa"][0] - row.bound) / 1e5, color="red", lw=0.8, ls=":",
                            label="lowest outlet pressure allowed")
            axes[2].legend(loc="best", fontsize=8)
    axes[2].set_ylabel("pressure [bar]")
    axes[2].set_xlabel("axial position z [m]")
    title = plain(case.title)
    if not result.ok:  # say where and why the run stopped, on every panel
        z_end = float(z[-1])
        for a in axes:
            a.axvline(z_end, color="black", lw=0.8, ls="--")
        axes[0].annotate(f"stopped at z = {z_end:.3g} m", (z_end, float(cols["T_K"][-1])), fontsize=8,
                         xytext=(-4, -12), textcoords="offset points", ha="right")
        title += "\n" + plain(f"SIMULATION STOPPED: {result.reason}")
    fig.suptitle(title, fontsize=9)
    return finish(fig, path, top=0.95 if not result.ok else 0.97)


def plot_radial(case, check, out: Path) -> dict:
    """The 2-D model: the temperature map T(z, r) and the centre-line, mixing-cup mean and wall profiles
    beside the 1-D profile(s). Returns {label: path}."""
    res = check.result
    cols = res.columns
    z = cols["z_m"]
    title = plain(case.title) + ("" if res.ok else "\n" + plain(f"2-D SIMULATION STOPPED: {res.reason}"))
    fig = new_figure((7.0, 4.2))
    ax = fig.subplots()
    mesh = ax.pcolormesh(z, res.radius_m * 1e3, res.temperature_map_K.T, shading="gouraud", cmap="inferno")
    fig.colorbar(mesh, ax=ax, label="temperature [K]")
    ax.set_xlabel("axial position z [m]")
    ax.set_ylabel("radius r [mm] (axis at 0, wall at the top)")
    ax.set_title(title, fontsize=8)
    paths = {"temperature_map_png": str(finish(fig, out / "temperature-map.png"))}
    fig = new_figure((7.0, 4.4))
    ax = fig.subplots()
    ax.plot(z, cols["T_centre_K"], label="2-D centre line")
    ax.plot(z, cols["T_mean_K"], label="2-D mixing-cup mean")
    ax.plot(z, cols["T_wall_K"], ":", label="2-D at the wall")
    for label, one in (("1-D (this case)", check.one_d), ("1-D (U lumped from the radial data)", check.lumped)):
        if one is not None and one.columns:
            ax.plot(one.columns["z_m"], one.columns["T_K"], "--", lw=1.0, label=label)
    if case.coolant.kind.exchanges_heat:
        ax.plot(z, cols["Tc_K"], color="gray", lw=0.8, label="coolant")
    if case.limits.get("max_temperature") is not None:
        ax.axhline(case.limits["max_temperature"], color="red", lw=0.8, ls=":", label="temperature limit")
    ax.set_xlabel("axial position z [m]")
    ax.set_ylabel("temperature [K]")
    ax.legend(loc="best", fontsize=7)
    ax.set_title(title, fontsize=8)
    paths["radial_profiles_png"] = str(finish(fig, out / "radial-profiles.png"))
    return paths


def plot_front(case, front: dict, path: Path) -> Path:
    """The cost-selectivity front: converged points joined, points that did not converge left out (listed
    in the report)."""
    fig = new_figure((6.0, 4.2))
    ax = fig.subplots()
    pts = sorted(front["points"], key=lambda p: p["selectivity"])
    ax.plot([p["selectivity"] for p in pts], [p["annual_cost_per_year"] for p in pts], "o-", ms=4)
    ax.set_xlabel(plain(f"selectivity to {case.product} [-]"))
    ax.set_ylabel("annual cost [per year]")
    missing = len(front.get("not_converged", []))
    ax.set_title(plain(case.title) + (f"\n({missing} point(s) did not converge: not drawn)" if missing else ""),
                 fontsize=8)
    return finish(fig, path)


def plot_robust(case, robust: dict, path: Path) -> Path:
    """The hot spot over the fresh verification samples for the nominal and the robust design, against the
    hot-spot limit (runaway samples sit at the temperature ceiling)."""
    fig = new_figure((6.4, 4.2))
    ax = fig.subplots()
    samples = {label: np.asarray(v.get("hot_spot_samples_K", []), dtype=float)
               for label, v in robust["verification"].items()}
    every = np.concatenate([t[np.isfinite(t)] for t in samples.values()] + [np.zeros(0)])
    edges = np.linspace(every.min(), every.max(), 41) if every.size and every.max() > every.min() else 40
    for label, colour in (("nominal", "C0"), ("robust", "C1")):
        v = robust["verification"].get(label)
        t = samples.get(label, np.zeros(0))
        t = t[np.isfinite(t)]
        if not t.size:
            continue
        ax.hist(t, bins=edges, alpha=0.55, color=colour,
                label=f"{label} design: passes every limit in {100 * v['probability']:.1f} % "
                      f"(95 %: {100 * v['interval_95'][0]:.1f}-{100 * v['interval_95'][1]:.1f} %)")
    limit = case.limits.get("max_temperature")
    if limit is not None:
        ax.axvline(limit, color="red", linestyle="--", label=f"hot-spot limit {limit:.1f} K")
    ax.set_xlabel("hot-spot temperature [K] (runaway samples at the temperature ceiling)")
    ax.set_ylabel(f"samples (of {robust['verification'].get('robust', {}).get('samples', '?')})")
    ax.set_title(plain(case.title) + f"\nrobust design over {robust['scenarios']} scenarios", fontsize=8)
    ax.legend(fontsize=7)
    return finish(fig, path)
