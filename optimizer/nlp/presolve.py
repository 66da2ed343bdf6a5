"""The compact NLP: variables that a linear equality defines explicitly are eliminated before IPOPT sees the
problem.

A collocation model keeps every derivative as its own variable, defined by a linear collocation equation
(dX(t_j) = sum_k a_jk X(t_k) / h). Such a variable is an affine function of the others, so the NLP IPOPT
solves can drop it together with its defining equation: x = T y + t, with y the kept variables, and

    objective f(T y + t),  constraints g_K(T y + t) (the rows that were not used),
    Jacobian J_K T,  Lagrangian Hessian T' H T (the used rows are linear: they add nothing to H).

Chosen at compilation (structure only): an equality row whose Hessian is zero (a linear form) defines one
of its variables when that variable has no bounds, a constant non-zero coefficient, has not been defined
already and appears in no row chosen before; among the candidates the one in the fewest rows is taken.
Rows chosen later may contain variables defined earlier, so the defining system is lower triangular in the
order of choice (solved by substitution, at most ``MAX_DEPTH`` levels deep).

Before that choice, *determined blocks* are taken out whole: a connected group of linear equality rows that
holds only its own variables, as many rows as variables with a structurally non-singular pattern, fixes
those variables from the inputs alone (an isothermal tube's temperatures and their derivatives; an inert
species' flows when the tube count is given). Their values come from one sparse LU at each refresh (x = t
there, T has no row for them); bounds are allowed on them, and a solve whose block values leave a bound, or
whose block is singular, falls back to the whole problem.

Values (coefficients, right-hand sides) are read at every refresh, so changed inputs re-solve without
recompiling. The multipliers of the used rows are recovered from stationarity in the eliminated variables
(a triangular solve, or one sparse LU with determined blocks), so every constraint keeps an exact
multiplier."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.sparse.linalg import splu, spsolve_triangular
from tubewright.optimizer.nlp.dangling import find_dangling, square_groups
from tubewright.optimizer.nlp.structure import INFINITY, sorted_unique

MAX_DEPTH = 8


class LinearElimination:
    """The affine map x = T y + t of a CompiledNLP and the reduced derivative structures."""

    def __init__(self, nlp):
        n, m = nlp.n, nlp.m
        self.nlp = nlp
        equality = nlp.equality_rows()
        # per row: the linear form that holds it (its index in nlp.forms; -1: not a linear equality) and the
        # row's member position in that form
        self._form_of, self._position = np.full(m, -1, dtype=np.int64), np.zeros(m, dtype=np.int64)
        for i, f in enumerate(nlp.forms):
            if f.pairs:
                continue
            members = np.asarray(f.members, dtype=np.int64)
            pos = np.flatnonzero(equality[members])
            self._form_of[members[pos]], self._position[members[pos]] = i, pos
        self._arity = np.array([f.var_index.shape[1] for f in nlp.forms] + [0], dtype=np.int64)  # [-1]: none
        lower, upper = nlp.variable_bounds()
        bounded = (lower > -INFINITY) | (upper < INFINITY)
        self.block_rows, self.block_cols = self._determined_blocks(n)
        choice = _Choice(self, bounded, np.bincount(nlp.jac_cols, minlength=n))
        open_rows = self._form_of >= 0
        open_rows[self.block_rows] = False
        in_copies = np.zeros(m, dtype=bool)
        for store in nlp.copy_stores:
            in_copies[store.all_rows()] = True
        choice.scan(np.flatnonzero(open_rows & ~in_copies))
        # a copy takes its template's choice when nothing outside the template could tell them apart (see
        # _Choice.replicate), else its rows are scanned like the model's own
        for store in nlp.copy_stores:
            if not choice.replicate(store):
                rows = np.arange(m)[store.all_rows()]
                choice.scan(rows[open_rows[rows]])
        depth = choice.depth
        self.rows = np.concatenate(choice.rows)  # the defining rows, in order of choice
        self.eliminated = np.concatenate(choice.picks)  # the variable each defines
        self.levels = int(depth.max()) if len(self.eliminated) else 0
        self.kept = np.flatnonzero(depth == 0)
        self.removed_rows = np.concatenate([self.rows, self.block_rows])  # every row IPOPT does not see
        kept_row = np.ones(m, dtype=bool)
        kept_row[self.removed_rows] = False
        self.kept_rows = np.flatnonzero(kept_row)
        self._row_groups = self._grouped(self.rows)
        self._block_groups = self._grouped(self.block_rows)
        block_local = np.full(n, -1, dtype=np.int64)
        block_local[self.block_cols] = np.arange(len(self.block_cols))
        self._b_i, b_cols = self._row_entries(self.block_rows)
        self._b_k = block_local[b_cols]
        self.block_values = np.zeros(len(self.block_cols))
        self.block_problem = None  # why the determined blocks could not be solved at the last refresh
        self.n, self.m = len(self.kept), len(self.kept_rows)
        self._column = np.full(n, -1, dtype=np.int64)
        self._column[self.kept] = np.arange(self.n)
        self._row_of = np.full(m, -1, dtype=np.int64)
        self._row_of[self.kept_rows] = np.arange(self.m)
        # defining rows' variables as (choice, column) pairs: the structure of W in x_E = W x + w0
        self._w_i, self._w_k = self._row_entries(self.rows)
        own = self._w_k == self.eliminated[self._w_i]
        self._own, self._other = np.flatnonzero(own), np.flatnonzero(~own)
        # structures from a map with positive weights (no cancellation: every possible entry is present)
        t_struct = self._map(np.ones(len(self._other)), np.ones(len(self._own)))
        self.jac_rows, self.jac_cols, self._jac_keys = self._structure(self._expand_jacobian(t_struct))
        self.hess_rows, self.hess_cols, self._hess_keys = self._structure(self._expand_hessian(t_struct))
        self._coef_key = None
        in_objective = np.zeros(self.n, dtype=bool)
        in_objective[t_struct[sorted_unique(np.concatenate([f.var_index.reshape(-1) for f in nlp.objective_forms]))
                              ].indices] = True
        self.dangling = find_dangling(self.n, self.m, self.jac_rows, self.jac_cols, self.hess_rows, self.hess_cols,
                                      ~bounded[self.kept], equality[self.kept_rows],
                                      in_objective, nlp.component_labels()[self.kept])

    def _row_entries(self, rows) -> tuple[np.ndarray, np.ndarray]:
        """The variables of linear rows as (i, column) per entry, i the row's position in ``rows``: row after
        row, each in its form's order (the layout of _linear_parts' coefficients)."""
        rows = np.asarray(rows, dtype=np.int64)
        forms = self._form_of[rows]
        arity = self._arity[forms]
        starts = np.cumsum(arity) - arity
        cols = np.empty(int(arity.sum()), dtype=np.int64)
        for f, idx, pos in self._grouped(rows):
            width = f.var_index.shape[1]
            cols[(starts[idx][:, None] + np.arange(width)).reshape(-1)] = f.var_index[pos].reshape(-1)
        return np.repeat(np.arange(len(rows), dtype=np.int64), arity), cols

    def _determined_blocks(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """(rows, columns) of the determined blocks among the linear equality rows: the connected groups of
        those rows (through shared variables) with as many rows as variables and a perfect bipartite
        matching."""
        rows = np.flatnonzero(self._form_of >= 0)
        if not len(rows):
            return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
        r, c = self._row_entries(rows)
        graph = sp.coo_matrix((np.ones(len(r)), (c, n + r)), shape=(n + len(rows), n + len(rows)))
        _, label = connected_components(graph, directed=False)
        row_label = label[n + np.arange(len(rows))]
        cols = sorted_unique(c)
        counts = len(label)
        square = (np.bincount(row_label, minlength=counts) == np.bincount(label[cols], minlength=counts))
        keep = square[row_label[r]]  # counts first: only the square groups are matched
        found = square_groups(r[keep], c[keep], row_label[r[keep]])
        if not found:
            return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
        return (np.concatenate([rows[g_rows] for g_rows, _ in found]).astype(np.int64),
                np.concatenate([g_cols for _, g_cols in found]).astype(np.int64))

    # --- the map x = T y + t -----------------------------------------------------------------------------
    def _map(self, other_coef, own_coef) -> sp.csr_matrix:
        """T (n x n_kept) from the coefficients of the defining rows (other variables, own variable)."""
        n_full = self.nlp.n
        kept = sp.csr_matrix((np.ones(self.n), (self.kept, np.arange(self.n))), shape=(n_full, self.n))
        if not len(self.rows):
            return kept
        w = sp.csr_matrix((-other_coef / own_coef[self._w_i[self._other]],
                           (self._w_i[self._other], self._w_k[self._other])), shape=(len(self.rows), n_full))
        inject = sp.csr_matrix((np.ones(len(self.rows)), (self.eliminated, np.arange(len(self.rows)))),
                               shape=(n_full, len(self.rows)))
        t_map = kept
        for _ in range(self.levels):  # lower triangular: exact after as many passes as levels
            t_map = (kept + inject @ (w @ t_map)).tocsr()
        t_map.sort_indices()
        return t_map

    def _grouped(self, rows) -> list:
        """Linear rows grouped by form: [(form, positions in ``rows``, member positions)]."""
        rows = np.asarray(rows, dtype=np.int64)
        forms = self._form_of[rows]
        out = []
        for i in sorted_unique(forms).tolist():
            idx = np.flatnonzero(forms == i)
            out.append((self.nlp.forms[i], idx, self._position[rows[idx]]))
        return out

    def _linear_parts(self, rows, groups, x_any, g_lb):
        """(coefficients, right-hand sides) of linear rows written a.x = rhs: the coefficients of each row's
        variables in its form's order, the rows one after another (read at any point: the rows are linear)."""
        nlp = self.nlp
        coef = np.empty(sum(f.var_index.shape[1] * len(idx) for f, idx, _ in groups))
        rhs = np.empty(len(rows))
        sizes = np.zeros(len(rows), dtype=np.int64)
        for f, idx, _ in groups:
            sizes[idx] = f.var_index.shape[1]
        starts = np.concatenate([[0], np.cumsum(sizes)[:-1]]) if len(rows) else sizes
        for f, idx, pos in groups:
            args = nlp._args(f, x_any)
            grads = f.derivatives(*args)[: f.var_index.shape[1]]
            values = np.broadcast_to(np.asarray(f.fn(*args)[0], dtype=float), (len(f.members),))
            local = np.stack([np.broadcast_to(np.asarray(g, dtype=float), (len(f.members),))[pos] for g in grads])
            for k in range(f.var_index.shape[1]):
                coef[starts[idx] + k] = local[k]
            # body = a.x + c0; the row asks body = g_lb, so a.x = g_lb - c0 with c0 = body(x) - a.x
            ax = np.einsum("kj,jk->j", local, x_any[f.var_index[pos]])
            rhs[idx] = g_lb[np.asarray(rows)[idx]] - (values[pos] - ax)
        return coef, rhs

    def refresh(self, x_any: np.ndarray, g_lb: np.ndarray):
        """Read the coefficients and right-hand sides of the defining rows (inputs may have changed) and solve
        the determined blocks."""
        nlp = self.nlp
        coef, rhs = self._linear_parts(self.rows, self._row_groups, x_any, g_lb)
        self._coef = coef
        own = coef[self._own]
        key = coef.tobytes()
        if key != self._coef_key:
            self.T = self._map(coef[self._other], own)
            self.TT = self.T.T.tocsr()
            self._jac_map = self._value_map(self._expand_jacobian(self.T), self._jac_keys, len(nlp.jac_rows))
            self._hess_map = self._value_map(self._expand_hessian(self.T), self._hess_keys, len(nlp.hess_rows))
            self._coef_key = key
        self._solve_blocks(x_any, g_lb)
        # the constant part: x = T y + t with t from the right-hand sides (same substitution, y = 0) and the
        # determined blocks' values
        t = np.zeros(nlp.n)
        t[self.block_cols] = self.block_values
        for _ in range(max(self.levels, 1)):
            t_new = np.zeros(nlp.n)
            t_new[self.block_cols] = self.block_values
            other_sum = np.bincount(self._w_i[self._other], weights=coef[self._other] * t[self._w_k[self._other]],
                                    minlength=len(self.rows))
            t_new[self.eliminated] = (rhs - other_sum) / own
            t = t_new
        self.t = t

    def _solve_blocks(self, x_any, g_lb):
        self.block_problem = None
        if not len(self.block_rows):
            return
        coef, rhs = self._linear_parts(self.block_rows, self._block_groups, x_any, g_lb)
        nb = len(self.block_cols)
        a = sp.csc_matrix((coef, (self._b_i, self._b_k)), shape=(nb, nb))
        try:
            with np.errstate(all="ignore"):
                values = splu(a).solve(rhs)
        except RuntimeError:
            values = None
        if values is None or not np.all(np.isfinite(values)):
            self.block_problem = "a determined block is singular at these inputs"
            return
        self.block_values = values

    def full(self, y: np.ndarray) -> np.ndarray:
        return self.T @ y + self.t

    # --- structures and value maps ----------------------------------------------------------------------
    def _expand_jacobian(self, t_map):
        nlp = self.nlp
        keep = self._row_of[nlp.jac_rows] >= 0
        q = np.flatnonzero(keep)
        k = nlp.jac_cols[q]
        counts = np.diff(t_map.indptr)[k]
        q_rep = np.repeat(q, counts)
        starts = np.repeat(t_map.indptr[k], counts)
        offset = np.arange(len(q_rep)) - np.repeat(np.cumsum(counts) - counts, counts)
        entry = starts + offset
        rows = self._row_of[nlp.jac_rows[q_rep]]
        return q_rep, rows, t_map.indices[entry], t_map.data[entry]

    def _expand_hessian(self, t_map):
        nlp = self.nlp
        hk, hl = nlp.hess_rows, nlp.hess_cols
        ck, cl = np.diff(t_map.indptr)[hk], np.diff(t_map.indptr)[hl]
        counts = ck * cl
        q = np.repeat(np.arange(len(hk)), counts)
        within = np.arange(len(q)) - np.repeat(np.cumsum(counts) - counts, counts)
        ia = t_map.indptr[hk][q] + within // cl[q]
        ib = t_map.indptr[hl][q] + within % cl[q]
        a, b = t_map.indices[ia], t_map.indices[ib]
        w = t_map.data[ia] * t_map.data[ib]
        diagonal_full = hk[q] == hl[q]
        # T' S T for S = v (e_k e_l' + e_l e_k'): reduced (a, b) gets v (T_ka T_lb + T_la T_kb); enumerating
        # (a, b) over T_k x T_l and folding onto the lower triangle counts the diagonal once (x 2 needed) and,
        # for a diagonal S = v e_k e_k', counts off-diagonal pairs twice (x 1/2 needed)
        w = np.where(~diagonal_full & (a == b), 2.0 * w, w)
        w = np.where(diagonal_full & (a != b), 0.5 * w, w)
        return q, np.maximum(a, b), np.minimum(a, b), w

    def _key(self, rows, cols) -> np.ndarray:
        """One integer per (row, column): row * n + column, in 64 bits (scipy's sparse indices may be 32-bit,
        and the product overflows them from about 46,000 kept variables on)."""
        return np.asarray(rows, dtype=np.int64) * self.n + np.asarray(cols, dtype=np.int64)

    def _structure(self, expanded):
        """Sorted unique reduced coordinates of expanded entries (q, row, col, weight): rows, cols, keys."""
        _, rows, cols, _ = expanded
        keys = sorted_unique(self._key(rows, cols))
        return keys // self.n, keys % self.n, keys

    def _value_map(self, expanded, keys, n_full):
        """The sparse matrix taking the full entries' values to the reduced structure ``keys``."""
        q, rows, cols, weights = expanded
        target = np.searchsorted(keys, self._key(rows, cols))
        return sp.csr_matrix((weights, (target, q)), shape=(len(keys), n_full))

    # --- reduced callbacks ------------------------------------------------------------------------------
    def objective(self, y):
        return self.nlp._obj(self.full(y))

    def gradient(self, y):
        return self.TT @ self.nlp._grad(self.full(y))

    def constraints(self, y):
        return self.nlp._cons(self.full(y))[self.kept_rows]

    def jacobian(self, y, wanted=None):
        """The reduced Jacobian (``wanted``: the full rows to evaluate, see CompiledNLP._jac)."""
        return self._jac_map @ self.nlp._jac(self.full(y), wanted)

    def hessian(self, y, lagrange, obj_factor):
        full_lambda = np.zeros(self.nlp.m)
        full_lambda[self.kept_rows] = lagrange
        return self._hess_map @ self.nlp._hess(self.full(y), full_lambda, obj_factor)

    # --- multipliers of the defining rows ---------------------------------------------------------------
    def defining_multipliers(self, x: np.ndarray, kept_lambda: np.ndarray) -> np.ndarray:
        """Multipliers of the removed rows (``removed_rows``: the defining rows, then the determined blocks'),
        from stationarity of the full Lagrangian in the eliminated variables (they have no bounds, or, in a
        determined block, keep inside them): A_RE' lambda_R = -(grad_E f + J_KE' lambda_K)."""
        nlp = self.nlp
        eliminated = np.concatenate([self.eliminated, self.block_cols])
        jac = sp.csr_matrix((nlp._jac(x), (nlp.jac_rows, nlp.jac_cols)), shape=(nlp.m, nlp.n))
        rhs = -(nlp._grad(x)[eliminated] + jac[self.kept_rows][:, eliminated].T @ kept_lambda)
        a_re = jac[self.removed_rows][:, eliminated]
        if not len(self.block_rows):  # lower triangular in the order of choice
            return spsolve_triangular(a_re.T.tocsr(), rhs, lower=False)
        return splu(a_re.T.tocsc()).solve(rhs)  # block lower triangular


class _Choice:
    """The sequential choice of defining rows (module docstring): for each linear equality row in turn, the
    variable it defines, if any. ``depth`` per column: 0 kept, k defined at substitution level k."""

    def __init__(self, elimination, bounded, appearances):
        self.elim = elimination
        self.bounded, self.appearances = bounded, appearances
        n = len(bounded)
        self.depth = np.zeros(n, dtype=np.int64)
        self.in_chosen = np.zeros(n, dtype=bool)  # appears in a row chosen so far
        self.depth[elimination.block_cols] = 1
        self.in_chosen[elimination.block_cols] = True
        self.rows, self.picks = [np.zeros(0, dtype=np.int64)], [np.zeros(0, dtype=np.int64)]

    def scan(self, rows):
        """Choose among ``rows``, in their order: the variable without bounds, with a constant non-zero
        coefficient, not defined and in no chosen row, in the fewest rows (the first of equals); none when a
        row would nest deeper than MAX_DEPTH. A loop over plain lists: indexing numpy arrays one element at a
        time costs more than the work itself."""
        rows = np.asarray(rows, dtype=np.int64)
        if not len(rows):
            return
        forms = [f.constant_gradient for f in self.elim.nlp.forms]
        form_of = self.elim._form_of[rows].tolist()
        _, entries = self.elim._row_entries(rows)
        arity = self.elim._arity[self.elim._form_of[rows]]
        starts = (np.cumsum(arity) - arity).tolist()
        entries = entries.tolist()
        bounded, appearances = self.bounded.tolist(), self.appearances.tolist()
        depth, in_chosen = self.depth.tolist(), bytearray(self.in_chosen.tobytes())
        chosen, picks = [], []
        for i, row in enumerate(rows.tolist()):
            coefs = forms[form_of[i]]
            cols = entries[starts[i]:starts[i] + len(coefs)]
            best, fewest = -1, 0
            for local, col in enumerate(cols):
                coef = coefs[local]
                if coef is None or coef == 0.0 or bounded[col] or depth[col] or in_chosen[col]:
                    continue
                if best < 0 or appearances[col] < fewest:
                    best, fewest = local, appearances[col]
            if best < 0:
                continue
            level = 1 + max(depth[c] for c in cols)
            if level > MAX_DEPTH:
                continue
            depth[cols[best]] = level
            for c in cols:
                in_chosen[c] = 1
            chosen.append(row)
            picks.append(cols[best])
        self.depth = np.asarray(depth, dtype=np.int64)
        self.in_chosen = np.frombuffer(bytes(in_chosen), dtype=bool).copy()
        self.rows.append(np.asarray(chosen, dtype=np.int64))
        self.picks.append(np.asarray(picks, dtype=np.int64))

    def replicate(self, store) -> bool:
        """Give every copy of ``store`` (nlp.copies) its template's choice, after the model's own rows were
        scanned; False (nothing changed) where a scan of the copies' rows could choose otherwise. A scan
        would choose the same when (a) the template's variables appear in no row but the template's (so
        their row counts and states are the copies' too), (b) no row defined a shared variable of the
        template's linear rows (such a variable is then either no candidate in a copy's row or one that lost
        in the template's row, with the same row count), and (c)
        the copies' variables have the template's pattern of bounds and the copies take the template's part
        in the determined blocks."""
        elim, nlp = self.elim, self.elim.nlp
        t_rows, t_cols = store.template_rows, store.template_columns
        n_rows, n_cols, count = len(t_rows), len(t_cols), store.count
        local_col = np.full(len(self.depth), -1, dtype=np.int64)
        local_col[t_cols] = np.arange(n_cols)
        local_row = np.full(len(elim._form_of), -1, dtype=np.int64)
        local_row[t_rows] = np.arange(n_rows)
        outside = local_row[nlp.jac_rows[local_col[nlp.jac_cols] >= 0]] < 0
        if outside.any():  # (a)
            return False
        linear = t_rows[elim._form_of[t_rows] >= 0]
        _, cols = elim._row_entries(linear)
        if np.any(self.depth[cols[local_col[cols] < 0]]):  # (b)
            return False
        copy_cols = store.first_column + np.arange(count * n_cols).reshape(count, n_cols)
        copy_rows = store.first_row + np.arange(count * n_rows).reshape(count, n_rows)
        is_block_row = np.zeros(len(elim._form_of), dtype=bool)
        is_block_row[elim.block_rows] = True
        is_block_col = np.zeros(len(self.depth), dtype=bool)
        is_block_col[elim.block_cols] = True
        for flags, copies, template in ((self.bounded, copy_cols, t_cols), (is_block_col, copy_cols, t_cols),
                                        (is_block_row, copy_rows, t_rows)):
            if np.any(flags[copies] != flags[template]):  # (c)
                return False
        chosen, picks = np.concatenate(self.rows), np.concatenate(self.picks)
        mine = local_row[chosen] >= 0
        rows, cols = local_row[chosen[mine]], local_col[picks[mine]]  # (b): the picks are the template's own
        self.depth[copy_cols] = self.depth[t_cols]
        self.in_chosen[copy_cols] = self.in_chosen[t_cols]
        self.rows.append(copy_rows[:, rows].reshape(-1))
        self.picks.append(copy_cols[:, cols].reshape(-1))
        return True
