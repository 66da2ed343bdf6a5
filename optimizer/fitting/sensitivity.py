"""The Jacobian of a fit's weighted residuals with respect to its parameters, from the collocation model at
the estimate.

The run blocks' equality rows g(s, theta) = 0 fix the states s for given parameters theta (the design is
fixed in a fit: as many rows as states). By the implicit function theorem ds/dtheta = -J_s^-1 J_theta,
with J_s and J_theta the model's Jacobian in the states and in the parameters at the estimate (one sparse
LU of J_s for all parameters). A weighted residual r(s, theta) = (prediction - measured) / sigma then has
dr/dtheta = dr/dtheta|_s + dr/ds ds/dtheta: the direct sensitivities, of the discretised model rather than
of the differential equations.

The residuals and their Jacobian are those of the very problem IPOPT solved, so the Gauss-Newton
statistics describe the estimate that was found; the integrator, at the estimate, checks the mesh
(estimate.fit)."""

from __future__ import annotations

from contextlib import nullcontext

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu


def residual_jacobian(nlp, parameters, residuals):
    """(weighted residuals, their Jacobian in the parameters as IPOPT sees them) at the model's current
    point, or None when the rows do not fix the states (not square, an inequality, a singular J_s).
    ``nlp``: the fit's CompiledNLP after its solve; ``parameters``: the Pyomo variables of the free
    parameters; ``residuals``: per weighted residual (Pyomo expression, CopyStore, copy number): the
    expression of a template block evaluated at that copy (store None: as it is, in the model)."""
    from pyomo.core import value
    from pyomo.core.expr.calculus.derivatives import differentiate
    from pyomo.core.expr.visitor import identify_variables

    position = {id(v): i for i, v in enumerate(nlp.variables[:nlp.model_size[0]])}  # copies: store.column
    theta = [position.get(id(p)) for p in parameters]
    if any(i is None for i in theta):
        return None
    is_theta = np.zeros(nlp.n, dtype=bool)
    is_theta[theta] = True
    states = np.flatnonzero(~is_theta)
    if len(states) != nlp.m or np.any(nlp.g_lb != nlp.g_ub):
        return None
    x = nlp.current_point(clip=False)
    dx = _compact_sensitivities(nlp, x, theta)
    if dx is None:
        dx = _sensitivities(nlp, x, theta, states)
    if dx is None or not np.all(np.isfinite(dx)):
        return None
    theta_col = {i: k for k, i in enumerate(theta)}
    r = np.empty(len(residuals))
    out = np.zeros((len(residuals), len(parameters)))
    by_copy: dict = {}
    for row, (_, store, k) in enumerate(residuals):
        by_copy.setdefault((id(store), k), (store, k, []))[2].append(row)
    wrt_of = [list(identify_variables(expr, include_fixed=False)) for expr, _, _ in residuals]
    for store, k, rows in by_copy.values():
        # a copy's residuals: its values in the template (those of the residuals' own variables)
        with nullcontext() if store is None else store.loaded(k, [v for row in rows for v in wrt_of[row]]):
            for row in rows:
                expr, wrt = residuals[row][0], wrt_of[row]
                r[row] = value(expr)
                if not wrt:
                    continue
                grads = differentiate(expr, wrt_list=wrt, mode=differentiate.Modes.reverse_numeric)
                for v, g in zip(wrt, grads):
                    i = store.column(k, v) if store is not None else None
                    i = position[id(v)] if i is None else i
                    if i in theta_col:
                        out[row, theta_col[i]] += g
                    else:
                        out[row] += g * dx[i]
    return r, out


def _implicit(values, rows, cols, shape, states, theta):
    """d(variables)/d(theta) of the square rows J(x) = 0 in ``states`` by the implicit function theorem, from
    the Jacobian entries ``values`` at (rows, cols) of a (rows, variables) ``shape``: the states' rows
    -J_s^-1 J_theta, the others zero; None when the values are not finite or J_s is singular."""
    if not np.all(np.isfinite(values)):
        return None
    jac = sp.csr_matrix((values, (rows, cols)), shape=shape)
    try:
        lu = splu(jac[:, states].tocsc())
    except RuntimeError:  # singular: the rows do not fix the states
        return None
    d = np.zeros((shape[1], len(theta)))
    d[states] = -lu.solve(jac[:, theta].toarray())
    return d


def _sensitivities(nlp, x, theta, states):
    """dx/dtheta (every variable, parameters' rows unused) from the whole model's Jacobian, or None."""
    with np.errstate(all="ignore"):
        values = nlp._jac(x)
    return _implicit(values, nlp.jac_rows, nlp.jac_cols, (nlp.m, nlp.n), states, theta)


def _compact_sensitivities(nlp, x, theta):
    """The same from the presolve's compact problem (nlp.presolve: x = T y + t, t free of the parameters),
    whose square Jacobian in the kept states is a quarter the size: dy_s/dtheta = -J_s^-1 J_theta and
    dx/dtheta = T dy/dtheta. None when there is no compact problem, it does not hold at x, or it keeps a
    different number of states than rows."""
    red = nlp.compact
    if red is None or not np.allclose(red.full(x[red.kept]), x, rtol=1e-9, atol=1e-12):
        return None
    position = np.full(nlp.n, -1, dtype=np.int64)
    position[red.kept] = np.arange(red.n)
    kept_theta = position[theta]
    if np.any(kept_theta < 0):
        return None
    is_theta = np.zeros(red.n, dtype=bool)
    is_theta[kept_theta] = True
    states = np.flatnonzero(~is_theta)
    if len(states) != red.m:
        return None
    with np.errstate(all="ignore"):
        values = red.jacobian(x[red.kept])
    dy = _implicit(values, red.jac_rows, red.jac_cols, (red.m, red.n), states, kept_theta)
    if dy is None:
        return None
    dy[kept_theta, np.arange(len(theta))] = 1.0
    return red.T @ dy
