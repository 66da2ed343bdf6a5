"""Dangling blocks: variables that IPOPT need not see.

A block is a set V of variables that appear in no objective term and in no constraint but a set R of
equality rows of their own, with as many rows as variables and a structurally non-singular Jacobian J_RV.
Given the other variables, R fixes V and nothing else: the rest of the problem does not depend on V. A
collocation model's output-only states are such blocks (the heat removed and the residence time along the
tube, whose balances nothing else reads; the coolant temperature when the fluid temperature is free). IPOPT
solves the problem without V and R; V is computed afterwards by Newton's method on R (one step when R is
linear in V). The multipliers of R are zero: stationarity in V reads J_RV' lambda_R - z_L + z_U = 0, as V
is in no objective term and in no other row; with V inside its bounds z = 0, and J_RV is non-singular.
When the values found leave a bound of V (or Newton fails), the whole problem is solved instead.

Found once per compiled problem from its structure (in the space of the compact problem, nlp.presolve);
applied at a solve only while R are still equalities."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, maximum_bipartite_matching
from scipy.sparse.linalg import splu
from tubewright.optimizer.nlp.structure import sorted_unique

NEWTON_STEPS = 20
STEP_TOLERANCE = 1e-10  # relative: a Newton step this small ends the recovery (one step more than a linear block needs)


class DanglingBlocks:
    """The variables ``cols`` and rows ``rows`` (indices of the problem they were found in) left out of
    the problem IPOPT sees, and the index maps between the two problems."""

    def __init__(self, cols, rows, n, m, jac_rows, jac_cols, hess_rows, hess_cols):
        self.cols, self.rows = np.asarray(cols, dtype=np.int64), np.asarray(rows, dtype=np.int64)
        self.keep_cols = np.setdiff1d(np.arange(n), self.cols)
        self.keep_rows = np.setdiff1d(np.arange(m), self.rows)
        col_new = np.full(n, -1, dtype=np.int64)
        col_new[self.keep_cols] = np.arange(len(self.keep_cols))
        row_new = np.full(m, -1, dtype=np.int64)
        row_new[self.keep_rows] = np.arange(len(self.keep_rows))
        self.jac_mask = (row_new[jac_rows] >= 0) & (col_new[jac_cols] >= 0)
        self.jac_rows, self.jac_cols = row_new[jac_rows[self.jac_mask]], col_new[jac_cols[self.jac_mask]]
        self.hess_mask = (col_new[hess_rows] >= 0) & (col_new[hess_cols] >= 0)
        self.hess_rows, self.hess_cols = col_new[hess_rows[self.hess_mask]], col_new[hess_cols[self.hess_mask]]
        # the block's own Jacobian entries, for Newton's method on R
        block_col = np.full(n, -1, dtype=np.int64)
        block_col[self.cols] = np.arange(len(self.cols))
        block_row = np.full(m, -1, dtype=np.int64)
        block_row[self.rows] = np.arange(len(self.rows))
        own = (block_row[jac_rows] >= 0) & (block_col[jac_cols] >= 0)
        self._own = np.flatnonzero(own)
        self._own_rows, self._own_cols = block_row[jac_rows[own]], block_col[jac_cols[own]]
        self.n, self.m = len(self.keep_cols), len(self.keep_rows)

    def applies(self, g_lb, g_ub) -> bool:
        """Whether the block's rows are still equalities (bounds may have been changed after compilation)."""
        return bool(np.all(g_lb[self.rows] == g_ub[self.rows]))

    def within(self, y, lower, upper) -> bool:
        """Whether the block variables' values in y keep their bounds."""
        v = y[self.cols]
        return bool(np.all(v >= lower[self.cols]) and np.all(v <= upper[self.cols]))

    def expand(self, z, y_block):
        """The point of the whole problem from IPOPT's point z and the block variables' values."""
        y = np.empty(len(self.keep_cols) + len(self.cols))
        y[self.keep_cols] = z
        y[self.cols] = y_block
        return y

    def recover(self, y, constraints, jacobian, target) -> tuple[np.ndarray, bool]:
        """y with the block variables solved from their rows (``constraints(y)`` and ``jacobian(y)`` of the
        problem the block was found in, ``target`` its row bounds): (y, converged)."""
        y = np.array(y, dtype=float)
        shape = (len(self.rows), len(self.cols))
        for _ in range(NEWTON_STEPS):
            with np.errstate(all="ignore"):
                residual = constraints(y)[self.rows] - target[self.rows]
                values = jacobian(y)[self._own]
            if not (np.all(np.isfinite(residual)) and np.all(np.isfinite(values))):
                return y, False
            try:
                step = splu(sp.csc_matrix((values, (self._own_rows, self._own_cols)), shape=shape)).solve(residual)
            except RuntimeError:  # numerically singular at this point
                return y, False
            y[self.cols] -= step
            if np.max(np.abs(step), initial=0.0) <= STEP_TOLERANCE * (1.0 + np.max(np.abs(y[self.cols]), initial=0.0)):
                return y, True
        return y, False


def find_dangling(n, m, jac_rows, jac_cols, hess_rows, hess_cols, free, equality, in_objective, groups=None):
    """The dangling blocks of a problem (n variables, m rows, Jacobian and Hessian structures; ``free``
    (without bounds) and ``in_objective`` per variable, ``equality`` per row; ``groups``: a label per
    variable, e.g. its indexed Pyomo component) as one DanglingBlocks, or None.

    A set of candidate variables outside the objective, with the rows that hold them, is a block when it has
    as many rows as variables, every row an equality and a structurally non-singular Jacobian (a perfect
    bipartite matching). Tried in passes, each among the variables and rows no block has taken: connected
    groups of free variables (through the rows that touch them), then the variables of one label (a pressure
    whose rows also hold the flows it depends on), then connected groups of any candidates. A block found
    later may appear in the rows of one found earlier (the coolant temperature in the rows of the heat
    removed), never the other way round: all blocks together form a block-triangular system with
    non-singular diagonal blocks, which Newton's method solves at once."""
    free = np.asarray(free, dtype=bool)
    outside = ~np.asarray(in_objective, dtype=bool)
    used_cols, used_rows = np.zeros(n, dtype=bool), np.zeros(m, dtype=bool)
    labels = np.asarray(groups) if groups is not None else None
    passes = [("connected", True), ("labels", False), ("connected", False)]
    changed = True
    while changed:
        changed = False
        for how, only_free in passes:
            if how == "labels" and labels is None:
                continue
            candidate = outside & ~used_cols & (free if only_free else True)
            found = _blocks(n, m, jac_rows, jac_cols, candidate, ~used_rows, equality,
                            labels if how == "labels" else None)
            for cols, rows in found:
                used_cols[cols] = True
                used_rows[rows] = True
                changed = True
    if not used_cols.any():
        return None
    return DanglingBlocks(np.flatnonzero(used_cols), np.flatnonzero(used_rows), n, m, jac_rows, jac_cols,
                          hess_rows, hess_cols)


def _blocks(n, m, jac_rows, jac_cols, candidate, open_rows, equality, labels=None) -> list:
    """[(columns, rows)] of the groups of candidate columns that are blocks, with the open rows that touch
    them: the connected groups (through those rows), or with ``labels`` the columns of one label."""
    touch = candidate[jac_cols] & open_rows[jac_rows]
    if not touch.any():
        return []
    r, c = jac_rows[touch], jac_cols[touch]
    if labels is not None:
        entry_label = labels[c]
    else:
        graph = sp.coo_matrix((np.ones(len(r)), (c, n + r)), shape=(n + m, n + m))
        _, label = connected_components(graph, directed=False)
        entry_label = label[c]
    return [(cols, rows) for rows, cols in square_groups(r, c, entry_label)
            if all(equality[row] for row in rows)]


def square_groups(r, c, label) -> list:
    """[(rows, columns)] of the groups of entries (row r, column c) with equal ``label`` whose pattern has as
    many rows as columns and a perfect bipartite matching (structurally non-singular), in the order of
    their labels, rows and columns sorted. All groups are matched at once: the groups' patterns side by
    side form a block-diagonal matrix, whose maximum matching is the union of the groups' own."""
    r, c, label = (np.asarray(a, dtype=np.int64).reshape(-1) for a in (r, c, label))
    if not len(r):
        return []
    width = int(max(r.max(), c.max())) + 1
    row_keys, row_of = sorted_unique(label * width + r, return_inverse=True)  # (group, row) pairs, sorted
    col_keys, col_of = sorted_unique(label * width + c, return_inverse=True)
    groups = sorted_unique(label)
    row_group = np.searchsorted(groups, row_keys // width)
    col_group = np.searchsorted(groups, col_keys // width)
    n_rows, n_cols = np.bincount(row_group, minlength=len(groups)), np.bincount(col_group, minlength=len(groups))
    square = n_rows == n_cols
    keep = square[row_group[row_of]]
    pattern = sp.csr_matrix((np.ones(int(keep.sum())), (row_of[keep], col_of[keep])),
                            shape=(len(row_keys), len(col_keys)))
    matched = maximum_bipartite_matching(pattern, perm_type="column") >= 0
    unmatched = np.bincount(row_group, weights=~matched, minlength=len(groups))
    row_starts, col_starts = np.cumsum(n_rows) - n_rows, np.cumsum(n_cols) - n_cols
    return [(row_keys[row_starts[g]:row_starts[g] + n_rows[g]] % width,
             col_keys[col_starts[g]:col_starts[g] + n_cols[g]] % width)
            for g in np.flatnonzero(square & (unmatched == 0)).tolist()]
