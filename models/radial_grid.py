"""Orthogonal collocation across the tube radius, symmetric about the axis, in the weak (Galerkin) form.

A radial profile y(x), x = r/R, symmetric about the axis, is a polynomial of degree n in u = x^2 (Villadsen
and Stewart, Chem. Eng. Sci. 22, 1967, 1483-1501; Finlayson, Nonlinear Analysis in Chemical Engineering,
1980, ch. 4). Its nodes are the n roots of the shifted Jacobi polynomial P_n^(1,0) on 0 < u < 1 plus the wall
u = 1: the right Radau points of the weight 1 in u, whose quadrature is exact to degree 2n. The cross-section
element is dA/A = du and the radial Laplacian is (1/x) d/dx(x dy/dx) = 4 d/du(u dy/du), so the weak form of
"Laplacian of y" tested with the Lagrange basis function l_j is

    integral l_j Lap(y) du = 4 l_j(1) u y'(1) - sum_k K_jk y_k,     K_jk = integral 4 u l_j' l_k' du

with the wall flux as the natural boundary term (symmetry at the axis needs nothing). The quadrature makes
the mass matrix diagonal and exact (weights ``mean``): w_j dy_j/dz = ... - (K y)_j. Since sum_j K_jk = 0,
the discrete radial fluxes cancel in the cross-section mean, so the radial model conserves elements and
energy exactly. The matrices use the barycentric Lagrange form (well conditioned), not monomials.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.special import roots_jacobi, roots_legendre


@dataclass(frozen=True)
class RadialGrid:
    """n interior nodes plus the wall node (index n). Row vectors act on values at all n + 1 nodes."""

    n: int
    u: np.ndarray  # (n + 1,) nodes in u = (r/R)^2, the last one the wall
    mean: np.ndarray  # (n + 1,): quadrature weights of the cross-section mean (integral over u of 0..1)
    stiffness: np.ndarray  # (n + 1, n + 1): K of the weak Laplacian (see the module docstring)
    centre: np.ndarray  # (n + 1,): value at the axis (interpolation to u = 0)

    @property
    def x(self) -> np.ndarray:
        return np.sqrt(self.u)

    def interpolation(self, u_new) -> np.ndarray:
        """(len(u_new), n + 1): the values at u_new from the values at the nodes."""
        return _lagrange_matrix(self.u, np.atleast_1d(np.asarray(u_new, dtype=float)))


def _barycentric_weights(u):
    diff = u[:, None] - u[None, :]
    np.fill_diagonal(diff, 1.0)
    return 1.0 / diff.prod(axis=1)


def _lagrange_matrix(nodes, points):
    w = _barycentric_weights(nodes)
    out = np.empty((points.size, nodes.size))
    for k, p in enumerate(points):
        d = p - nodes
        hit = np.isclose(d, 0.0, atol=1e-15)
        if hit.any():
            out[k] = hit.astype(float)
        else:
            t = w / d
            out[k] = t / t.sum()
    return out


def _differentiation_matrix(u):
    """D[i, j] = l_j'(u_i) for the Lagrange basis on the nodes u (Berrut and Trefethen, SIAM Review 46,
    2004, 501-517, eq. 9.4)."""
    w = _barycentric_weights(u)
    diff = u[:, None] - u[None, :]
    np.fill_diagonal(diff, 1.0)
    d = (w[None, :] / w[:, None]) / diff
    np.fill_diagonal(d, 0.0)
    np.fill_diagonal(d, -d.sum(axis=1))
    return d


@lru_cache(maxsize=32)
def radial_grid(n: int) -> RadialGrid:
    """The grid of ``n`` interior points (1 <= n <= 40)."""
    if not 1 <= n <= 40:
        raise ValueError(f"radial points must be 1..40, got {n}")
    t, _ = roots_jacobi(n, 1.0, 0.0)  # weight (1 - t) on -1..1 -> (1 - u) on 0..1
    u = np.concatenate([np.sort((t + 1.0) / 2.0), [1.0]])
    g, gw = roots_legendre(n + 2)  # Gauss-Legendre on 0..1: exact for the integrands below (degree <= 2n)
    g, gw = (g + 1.0) / 2.0, gw / 2.0
    basis = _lagrange_matrix(u, g)
    mean = gw @ basis
    slopes = basis @ _differentiation_matrix(u)  # l_k'(g): the derivative (degree n-1) interpolated exactly
    stiffness = slopes.T @ ((4.0 * g * gw)[:, None] * slopes)
    centre = _lagrange_matrix(u, np.array([0.0]))[0]
    return RadialGrid(n, u, mean, stiffness, centre)
