"""Cheap bounds checked before IPOPT: a duty that the feed cannot give is refused at once, with the bound
that rules it out, instead of after hundreds of iterations.

The bounds are linear programmes over the reaction extents xi_j [mol/s] of the whole reactor: every outlet
flow F_i0 + sum_j nu_ij xi_j must stay non-negative, and an irreversible reaction runs forward only
(xi_j >= 0). Whatever the kinetics, temperatures and layout, no outlet lies outside this polytope (mole
balance; a fact of stoichiometry), so its maxima bound the production rate and the conversion."""

from __future__ import annotations

import numpy as np


def _extent_bound(case, objective) -> float | None:
    """The largest value of objective . xi over the attainable extents, or None if unbounded (a reversible
    network with a cycle) or the LP fails."""
    from scipy.optimize import linprog

    names = case.names
    nu = np.array([[rx.nu.get(s, 0.0) for rx in case.reactions] for s in names])  # species x reactions
    feed = np.asarray(case.feed.molar_flows, dtype=float)
    bounds = [(None, None) if rx.reversible else (0.0, None) for rx in case.reactions]
    res = linprog(-np.asarray(objective, dtype=float), A_ub=-nu, b_ub=feed, bounds=bounds, method="highs")
    return float(-res.fun) if res.status == 0 else None


def stoichiometric_maximum_production(case) -> float | None:
    """The largest net formation of chemistry.product [mol/s] that the feed allows (see the module)."""
    return _extent_bound(case, [rx.nu.get(case.product, 0.0) for rx in case.reactions])


def stoichiometric_maximum_conversion(case) -> float | None:
    """The largest conversion of the key reactant that the feed allows (a co-reactant may run out first)."""
    key = case.key_reactant
    most = _extent_bound(case, [-rx.nu.get(key, 0.0) for rx in case.reactions])
    return None if most is None else min(1.0, most / case.feed.molar_flows[case.index(key)])


def infeasible_duties(case, limits: dict) -> list[dict]:
    """The limits that no design can meet, each with its bound and the stoichiometric maximum (empty when
    none is ruled out)."""
    out = []
    if "production_rate" in limits and case.product:
        most = stoichiometric_maximum_production(case)
        if most is not None and limits["production_rate"] > most * (1.0 + 1e-9):
            out.append({"limit": "production_rate", "bound": limits["production_rate"], "maximum": most,
                        "unit": "mol/s", "why": f"the feed can give at most {most:.6g} mol/s of "
                        f"{case.product} (all of it converted along the best stoichiometric path)"})
    if "min_conversion" in limits:
        most = stoichiometric_maximum_conversion(case)
        if most is not None and limits["min_conversion"] > most * (1.0 + 1e-9):
            out.append({"limit": "min_conversion", "bound": limits["min_conversion"], "maximum": most, "unit": "-",
                        "why": f"the feed allows a conversion of {case.key_reactant} of at most {most:.6g} (a "
                        "co-reactant runs out first)"})
    return out
