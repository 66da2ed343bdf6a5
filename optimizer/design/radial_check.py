"""The two-dimensional check of an optimum: the design is found with the 1-D model; when its radial criterion
warns (models.checks.radial_gradient), the final design is simulated with the 2-D model (models.radial) and
its centre-line hot spot compared with the hot-spot limit. On request the optimisation is repeated with the
1-D hot-spot limit tightened by the 2-D excess, until the 2-D hot spot meets the limit.

The passes: when the case's 1-D heat transfer is not the one lumped from the radial data (a bed-side
correlation such as Leva's), the first pass re-optimises with the lumped coefficient (heat_transfer.inside =
"radial_lumped"), the limit unchanged, so that the 1-D and 2-D models use the same data; every further pass
tightens the 1-D limit by the 2-D excess over (limit - MARGIN_K): the first by the excess itself, the next
by a secant step on the 1-D limits and 2-D hot spots of the passes so far (the 2-D hot spot follows the 1-D
limit with a slope near one, so a plain fixed-point step converges only linearly and from above). When the
2-D model runs away (stops at the temperature ceiling) the excess is unknown; the pass then halves the allowed
rise of the 1-D limit over the larger of the feed and coolant temperatures. At most MAX_PASSES passes.
"""

from __future__ import annotations

from tubewright.models.casefile import apply_overrides, build_case

MAX_PASSES = 6
MARGIN_K = 0.01  # the passes aim this far below the limit, so that the last one keeps it strictly


def _radial_warns(findings) -> bool:
    return any(f.code == "radial_gradient" and f.level == "warning" for f in findings)


def _hot_spot_limit(res):
    for row in res.limits:
        if row.name == "max_temperature":
            return row.bound
    return None


def two_d_check(design, simulation):
    """The 2-D model at a design case already simulated in 1-D (``simulation``): a models.radial.RadialCheck
    without the grid check. A module-level function: the command line runs it in its second process."""
    from tubewright.models.radial import radial_check

    return radial_check(design, one_d=simulation, grid_check=False)


def _check(case, res):
    from tubewright.optimizer.design.problem import design_case
    from tubewright.optimizer.design.spec import values_by_key

    return two_d_check(design_case(case, values_by_key(res.design)), res.simulation)


def start_early(design, simulation, tighten: bool, run_elsewhere):
    """The 2-D check of a converged design started in another process (``run_elsewhere(fn, *args)`` returns
    an object whose ``result()`` is fn's answer) as soon as its 1-D profiles are known, when
    ``radial_design_check`` will ask for it (the radial criterion warns, or ``tighten``); else None."""
    from tubewright.models.checks import radial_gradient

    if design.radial is None or not (tighten or _radial_warns(radial_gradient(design, simulation))):
        return None
    return run_elsewhere(two_d_check, design, simulation)


def radial_design_check(res, tighten: bool = False, progress=None, started=None) -> dict | None:
    """The 2-D check of an optimisation result ``res`` (its ``case`` and final ``simulation``): None when the
    radial criterion does not warn and no tightening is asked; else a dict with ``run`` (False with a
    ``reason`` when the case has no [radial] table), the 2-D ``figures``, the ``limit_K``, ``violated`` and,
    with ``tighten``, the ``passes`` and the ``tightened`` design. ``started``: the check of ``res``'s design
    begun elsewhere (``start_early``)."""
    case = res.case
    if not res.ok or res.simulation is None or (not tighten and not _radial_warns(res.simulation.findings)):
        return None
    if case.radial is None:
        return {"run": False, "reason": "the radial criterion warns but the case has no [radial] table (the data of "
                "the two-dimensional model: solid_conductivity for a packed bed, or lambda_er and alpha_w)"}
    if progress is not None:
        progress("two-dimensional check of the optimum")
    limit = _hot_spot_limit(res)
    check = started.result() if started is not None else _check(case, res)
    out = {"run": True, "figures": check.figures(), "limit_K": limit, "status_2d": check.result.status,
           "violated": _violated(check, limit), "objective_1d": res.objective}
    if tighten and limit is not None and out["violated"]:
        out.update(_tighten(case, res, check, limit, progress))
    return out


def _violated(check, limit) -> bool | None:
    if limit is None:
        return None
    return not check.result.ok or check.result.summary["centre_hot_spot_K"] > limit


def _tighten(case, res, check, limit, progress) -> dict:
    from tubewright.models.radial import lumped_case
    from tubewright.optimizer.design.optimise import optimise

    passes = []
    limit_1d = limit
    ref = max(case.feed.temperature, case.coolant.temperature or case.feed.temperature)
    current_check = check
    lump = lumped_case(case) is not case
    history = []  # (1-D limit, 2-D hot spot) of the passes whose 2-D run reached the outlet
    for k in range(1, MAX_PASSES + 1):
        if lump:
            change = "1-D heat transfer lumped from the radial data (limit unchanged)"
        elif current_check.result.ok:
            hot = current_check.result.summary["centre_hot_spot_K"]
            history.append((limit_1d, hot))
            excess = hot - (limit - MARGIN_K)
            slope = 1.0
            if len(history) >= 2 and history[-1][0] != history[-2][0]:
                (l0, h0), (l1, h1) = history[-2:]
                slope = min(max((h1 - h0) / (l1 - l0), 0.2), 5.0)
            limit_1d -= excess / slope
            change = f"1-D limit tightened by {excess / slope:.3g} K (2-D excess {excess:.3g} K)"
        else:
            limit_1d = ref + 0.5 * (limit_1d - ref)
            change = "the 2-D model ran away: allowed rise of the 1-D limit halved"
        if progress is not None:
            progress(f"2-D tightening pass {k}: {change}")
        tightened = build_case(apply_overrides(case.raw, {"limits.max_temperature": f"{limit_1d!r} K"}, case.source),
                               case.source)
        tightened = lumped_case(tightened)
        lump = False
        current = optimise(tightened)
        current.case = tightened
        row = {"pass": k, "change": change, "limit_1d_K": limit_1d, "status": current.status,
               "objective": current.objective}
        if not current.ok:
            row["reason"] = current.reason
            passes.append(row)
            return {"passes": passes, "met": False,
                    "tightened": {"reason": f"pass {k} did not converge: {current.reason}"}}
        current_check = _check(tightened, current)
        figs = current_check.figures()
        row.update(hot_spot_1d_K=figs["one_d_hot_spot_K"], hot_spot_2d_K=figs["centre_hot_spot_K"],
                   status_2d=current_check.result.status)
        passes.append(row)
        if not _violated(current_check, limit):
            return {"passes": passes, "met": True,
                    "tightened": {"design": current.design, "objective": current.objective, "limit_1d_K": limit_1d,
                                  "inside": tightened.heat_transfer.inside, "figures": figs, "passes": k}}
    return {"passes": passes, "met": False,
            "tightened": {"reason": f"the 2-D hot spot still passes the limit after {MAX_PASSES} passes"}}
