"""Sampling the unit hypercube with SALib and mapping samples to case parameters.

Seeds: an int (0 is a seed like any other). SALib gets fresh numpy Generators derived from it, never a bare
int, so its ``if seed:`` test cannot turn seed 0 into "no seed"."""

from __future__ import annotations

import numpy as np

MORRIS_LEVELS = 4
MORRIS_QUANTILES = (0.005, 0.995)  # unbounded distributions: the Morris grid spans these quantiles


def rng_for(seed: int, stream: int) -> np.random.Generator:
    return np.random.default_rng([int(seed), stream])


def sample(problem: dict, method: str, n: int, seed: int) -> np.ndarray:
    """Unit-hypercube samples: Sobol (Saltelli/Jansen, N (D + 2) rows, no second order) or Morris (N
    trajectories of D + 1 rows, D = factors or groups)."""
    if method == "sobol":
        from SALib.sample import sobol

        return sobol.sample(problem, n, calc_second_order=False, scramble=True, seed=rng_for(seed, 1))
    from SALib.sample import morris

    u = morris.sample(problem, n, num_levels=MORRIS_LEVELS, seed=rng_for(seed, 1))
    lo, hi = MORRIS_QUANTILES
    return lo + (hi - lo) * u


def to_parameters(items, unit_x: np.ndarray) -> dict:
    """Unit samples -> {path: SI values} (one column per uncertain item; the factors of a correlated set
    are mapped together)."""
    out, sets = {}, {}
    for j, u in enumerate(items):
        if u.joint is None:
            out[u.path] = u.to_case_value(u.from_unit(unit_x[:, j]))
        else:
            sets.setdefault(u.joint.name, (u.joint, []))[1].append(j)
    for joint, columns in sets.values():
        z = np.column_stack([items[j].from_unit(unit_x[:, j]) for j in columns])
        out.update(joint.case_values(z))
    return out
