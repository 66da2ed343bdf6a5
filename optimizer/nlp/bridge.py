"""The Pyomo-to-cyipopt bridge: a Pyomo NLP in, IPOPT (through cyipopt) out, without the PyNumero ASL library.

Compilation, once per model:
1. Every active constraint body is walked for its structure key (nlp.structure); the first body of each key is
   printed as numpy code with its unfixed variables and its inputs (mutable Params, fixed Vars) replaced by
   numbered placeholders. That text is the constraint's *form*: the many constraints of a collocation model
   share a few dozen forms.
2. One representative per form is differentiated with Pyomo's reverse symbolic differentiation (first and
   second derivatives, lower triangle); each derivative is printed with the same placeholders and compiled.
3. Row families (nlp.families) repeat a template block's rows over sets of the model's variables (the
   elements of a collocation mesh), and copies of a template block (nlp.copies), if asked for, add new
   columns and rows: both join the template rows' forms as more members, by index arithmetic.
   Every form is then evaluated vectorised over all its members with numpy. Repeated Hessian coordinates
   are merged once, at build time, through an index for ``numpy.bincount``.
4. The compact NLP (nlp.presolve): variables that a linear equality defines explicitly (pyomo.dae's
   derivative variables) are eliminated, and variables that their own linear rows determine are solved,
   before IPOPT sees the problem; the point and every multiplier are reported for the whole model.

Inputs (mutable Params and fixed Vars), variable bounds and constraint bounds are read at each ``solve``,
so a changed parameter is re-solved without recompiling. Changing which variables are fixed needs a new
``CompiledNLP``.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field

import numpy as np
import pyomo.core.expr as EXPR
from pyomo.core import value
from pyomo.core.base.constraint import Constraint
from pyomo.core.base.objective import Objective, maximize
from pyomo.core.expr.calculus.derivatives import differentiate
from tubewright.optimizer.nlp.copies import Copies, CopyStore, Pool
from tubewright.optimizer.nlp.families import FamilyRow, families_of, origin
from tubewright.optimizer.nlp.form_cache import FormCache
from tubewright.optimizer.nlp.presolve import LinearElimination
from tubewright.optimizer.nlp.pyomo_rules import install_rules
from tubewright.optimizer.nlp.structure import INFINITY, sorted_unique, split_bounds, structure_key, variable_bounds

IPOPT_STATUS = {
    0: "optimal", 1: "acceptable", 2: "infeasible", 3: "search direction too small", 4: "diverging iterates",
    5: "user stop", 6: "feasible point found", -1: "maximum iterations", -2: "restoration failed",
    -3: "error in step computation", -4: "maximum CPU time", -5: "maximum wall time",
    -10: "not enough degrees of freedom",
    -11: "invalid problem definition", -12: "invalid option", -13: "invalid number detected",
    -100: "unrecoverable exception", -101: "non-IPOPT exception", -102: "insufficient memory", -199: "internal error",
}


class _Printer:
    """Prints Pyomo expressions as numpy code, one assignment per distinct node (shared subtrees, which the
    balances and Pyomo's derivatives produce in plenty, are evaluated once). Collects the unfixed variables
    and the inputs in order of first appearance: they become the placeholders x0.. and p0.."""

    def __init__(self):
        self.fold = False  # fold the numbers 0 and 1 (see _folded): on for the derivatives, which abound in them
        self.vars: list = []
        self.inputs: list = []
        self._var_slot: dict = {}
        self._input_slot: dict = {}
        self._lines: list[str] = []
        self._memo: dict = {}
        self._text: dict = {}  # right-hand side -> its name: equal subtrees built apart are evaluated once
        self._keep: list = []  # holds printed nodes so that their ids stay unique while memoised

    def leaf(self, node) -> str:
        kind = _LEAF_KINDS.get(node.__class__)
        if kind is None:
            kind = _LEAF_KINDS[node.__class__] = ("var" if node.is_variable_type() else
                                                  "param" if node.is_parameter_type() else "other")
        if kind == "var":
            if node.fixed:
                return self._input(node)
            slot = self._var_slot.get(id(node))
            if slot is None:
                slot = self._var_slot[id(node)] = len(self.vars)
                self.vars.append(node)
            return f"x{slot}"
        if kind == "param" and not node.is_constant():  # a mutable Param
            return self._input(node)
        return repr(float(value(node)))

    def _input(self, node) -> str:
        slot = self._input_slot.get(id(node))
        if slot is None:
            slot = self._input_slot[id(node)] = len(self.inputs)
            self.inputs.append(node)
        return f"p{slot}"

    def source(self, name: str, exprs) -> str:
        """Source of ``def name(x0.., p0..): ...; return [values of exprs]``; placeholders are numbered
        across calls, so call ``source`` for the value first."""
        self._lines, self._memo, self._text, self._keep = [], {}, {}, []
        outs = [self.atom(e) for e in exprs]
        return "\n".join(self._lines + [f"return [{', '.join(outs)}]"])

    def atom(self, node) -> str:
        cls = node.__class__
        if cls in EXPR.native_numeric_types:
            return repr(float(node))
        kind = _NODE_KINDS.get(cls)
        if kind is None:
            kind = _NODE_KINDS[cls] = ("leaf" if not node.is_expression_type() else
                                       "named" if node.is_named_expression_type() else "operation")
        if kind == "leaf":
            return self.leaf(node)
        if kind == "named":
            return self.atom(node.expr)
        name = self._memo.get(id(node))
        if name is not None:
            return name
        args = [self.atom(a) for a in node.args]
        fmt = _FORMATS.get(cls) or _FORMATS.setdefault(cls, _format_of(node))
        rhs = _folded(node, args) if self.fold else None
        if rhs is None:
            rhs = fmt(node, args)
            name = self._text.get(rhs)
        else:
            name = rhs if _is_atom(rhs) else self._text.get(rhs)
        if name is None:
            name = self._text[rhs] = f"t{len(self._lines)}"
            self._lines.append(f"{name} = {rhs}")
        self._memo[id(node)] = name
        self._keep.append(node)
        return name


# Printing dispatches on the node's class (the class decides the kind of a Pyomo node), cached on first sight:
# the tree walk is most of the compile time of a large model.
_NODE_KINDS: dict = {}
_LEAF_KINDS: dict = {}
_FORMATS: dict = {}


def _format_of(node):
    """The printing function of a Pyomo operation node's class."""
    if isinstance(node, EXPR.Expr_ifExpression):
        return lambda n, a: f"np.where({a[0]}, {a[1]}, {a[2]})"
    if isinstance(node, EXPR.InequalityExpression):
        return lambda n, a: f"{a[0]} {'<' if n.strict else '<='} {a[1]}"
    if isinstance(node, (EXPR.SumExpression, EXPR.LinearExpression)):
        return lambda n, a: _sum_text(a)
    if isinstance(node, (EXPR.ProductExpression, EXPR.MonomialTermExpression)):
        return lambda n, a: f"{a[0]} * {a[1]}"
    if isinstance(node, EXPR.DivisionExpression):
        return lambda n, a: f"{a[0]} / {a[1]}"
    if isinstance(node, EXPR.PowExpression):
        return lambda n, a: f"{a[0]} ** {a[1]}"
    if isinstance(node, EXPR.NegationExpression):
        return lambda n, a: f"-{a[0]}"
    if isinstance(node, EXPR.AbsExpression):
        return lambda n, a: f"np.abs({a[0]})"
    if isinstance(node, EXPR.UnaryFunctionExpression):
        return lambda n, a: f"np.{n.getname()}({a[0]})"
    raise TypeError(f"the bridge cannot print expressions of type {type(node).__name__}")


LONG_SUM = 64  # terms beyond which a sum is printed as one call: Python's compiler nests a + b + c ... and
# overflows its recursion limit at a few thousand terms (an objective over thousands of measurements)


def _sum_text(terms) -> str:
    """A printed sum: a + b + ... when short, else sum((a, b, ...), 0.0) (a flat tuple, as deep as one term)."""
    return " + ".join(terms) if len(terms) <= LONG_SUM else f"sum(({', '.join(terms)},), 0.0)"


def _literal(text: str):
    """The number a printed atom stands for, or None for a placeholder or temporary."""
    if text[0] not in "0123456789.-":
        return None
    try:
        return float(text)
    except ValueError:
        return None


def _is_atom(text: str) -> bool:
    """A placeholder, a temporary or a number: used as it is, without a line of its own."""
    return text.isidentifier() or _literal(text) is not None


def _folded(node, args):
    """The simpler right-hand side of an operation whose arguments include the numbers 0 or 1 (Pyomo's
    symbolic derivatives are full of them), or its value when every argument is a number; None when nothing
    folds. Folding 0 * x to 0 drops a NaN or an infinity that x might carry, as automatic differentiation
    tools do."""
    kind = _FOLD_KINDS.get(node.__class__)
    if kind is None:
        return None
    numbers = [_literal(a) for a in args]
    if all(v is not None for v in numbers):
        try:
            v = (sum(numbers) if kind == "sum" else numbers[0] * numbers[1] if kind == "product" else
                 numbers[0] / numbers[1] if kind == "division" else -numbers[0] if kind == "negation" else
                 numbers[0] ** numbers[1])
        except (ArithmeticError, ValueError):
            return None
        return None if isinstance(v, complex) or not np.isfinite(v) else repr(float(v))
    if kind == "sum":
        terms = [a for a, v in zip(args, numbers) if v != 0.0]
        if len(terms) == len(args):
            return None
        return _sum_text(terms) if terms else "0.0"
    if kind == "product":
        if 0.0 in numbers:
            return "0.0"
        if numbers[0] == 1.0:
            return args[1]
        if numbers[1] == 1.0:
            return args[0]
    elif kind == "division":
        if numbers[0] == 0.0:
            return "0.0"
        if numbers[1] == 1.0:
            return args[0]
    elif kind == "negation" and numbers[0] == 0.0:
        return "0.0"
    elif kind == "power":
        if numbers[1] == 1.0:
            return args[0]
        if numbers[1] == 0.0:
            return "1.0"
    return None


_FOLD_KINDS = {EXPR.SumExpression: "sum", EXPR.LinearExpression: "sum", EXPR.ProductExpression: "product",
               EXPR.MonomialTermExpression: "product", EXPR.DivisionExpression: "division",
               EXPR.NegationExpression: "negation", EXPR.PowExpression: "power"}


@dataclass
class _Form:
    """One form: compiled value, gradient and Hessian functions, and the index matrices of its members."""

    members: list  # row numbers (constraints) or [0] for the objective
    var_index: np.ndarray  # (members, local vars) -> global variable index
    input_index: np.ndarray  # (members, local inputs) -> global input index
    fn: object
    derivatives: object  # returns the gradient entries, then the Hessian entries (shared subexpressions once)
    n_grad: int
    pairs: list  # (a, b) local pairs of the Hessian lower triangle, a >= b
    constant_gradient: list  # per local variable: its derivative when a number, else None


def _code(name: str, body: str, nx: int, npar: int):
    """The byte code of a module defining ``name(x0.., p0..)`` with the printed body."""
    args = ", ".join([f"x{i}" for i in range(nx)] + [f"p{i}" for i in range(npar)])
    src = f"def {name}({args}):\n" + "\n".join("    " + line for line in body.split("\n")) + "\n"
    return compile(src, f"<bridge {name}>", "exec")


def _function(code, name: str):
    namespace = {"np": np}
    exec(code, namespace)  # code printed from the model (or read back from the form cache), not user text
    return namespace[name]


def _derive(rep_expr, printer: _Printer, value_source: str):
    """What a form yields, differentiated and compiled: (value code, derivatives code, number of gradient
    entries, Hessian pairs (a, b) with a >= b, constant gradient entries (None where not a number))."""
    local_vars = list(printer.vars)
    nx, npar = len(local_vars), len(printer.inputs)
    grads = differentiate(rep_expr, wrt_list=local_vars, mode=differentiate.Modes.reverse_symbolic) if nx else []
    pairs, second = [], []
    for a, g in enumerate(grads):
        if g.__class__ in EXPR.native_numeric_types:
            continue
        column = differentiate(g, wrt_list=local_vars[: a + 1], mode=differentiate.Modes.reverse_symbolic)
        for b, h in enumerate(column):
            if h.__class__ in EXPR.native_numeric_types and h == 0:
                continue
            pairs.append((a, b))
            second.append(h)
    grad_list = grads or [0.0]
    printer.fold = True
    deriv_source = printer.source("derivatives", list(grad_list) + (second or [0.0]))
    if len(printer.vars) != nx or len(printer.inputs) != npar:
        raise RuntimeError("a derivative introduced a variable or input absent from its expression")
    return (_code("value", value_source, nx, npar), _code("derivatives", deriv_source, nx, npar), len(grad_list),
            pairs, [float(g) if g.__class__ in EXPR.native_numeric_types else None for g in grads])


def _build_form(rep_expr, printer: _Printer, value_source: str, members, var_rows, input_rows,
                cache: FormCache | None = None) -> _Form:
    nx, npar = len(printer.vars), len(printer.inputs)
    record = cache.get(value_source, nx, npar) if cache is not None else None
    if record is None:
        record = _derive(rep_expr, printer, value_source)
        if cache is not None:
            cache.put(value_source, nx, npar, *record)
    value_code, derivatives_code, n_grad, pairs, constant_gradient = record
    return _Form(members, _stacked(var_rows, len(members), nx), _stacked(input_rows, len(members), npar),
                 _function(value_code, "value"), _function(derivatives_code, "derivatives"), n_grad,
                 [tuple(p) for p in pairs], constant_gradient)


def _stacked(chunks, members: int, width: int) -> np.ndarray:
    """The (members, width) index matrix from chunks of rows: lists of one member's indices, or 2-D arrays of
    several members' (a replicated block's members of one form)."""
    if width == 0:
        return np.zeros((members, 0), dtype=np.int64)
    return np.concatenate([np.asarray(c, dtype=np.int64).reshape(-1, width) for c in chunks])


def _rows(values, members: int) -> np.ndarray:
    """Stack per-entry values (arrays over the members, or constants) into a (entries, members) array."""
    out = np.empty((len(values), members))
    for i, v in enumerate(values):
        out[i] = v
    return out


@dataclass
class SolveOutcome:
    """Typed result of one IPOPT solve."""

    status: int
    status_name: str
    message: str
    success: bool
    iterations: int
    objective: float
    constraint_violation: float
    x: np.ndarray
    multipliers: np.ndarray  # per constraint row, IPOPT's sign convention (Lagrangian f + lambda^T g)
    bound_multipliers_lower: np.ndarray
    bound_multipliers_upper: np.ndarray
    times: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        return {"status": self.status, "status_name": self.status_name, "message": self.message,
                "success": self.success, "iterations": self.iterations, "objective": self.objective,
                "constraint_violation": self.constraint_violation, "times_s": self.times}


class CompiledNLP:
    """A Pyomo model compiled once for IPOPT. ``solve()`` reads inputs and bounds anew each time."""

    def __init__(self, model, compact: bool = True, replicas=(), copies: list[Copies] = ()):
        """``compact``: eliminate the variables that linear equalities define explicitly before IPOPT sees
        the problem (nlp.presolve); the solution and every multiplier are reported for the whole model.
        ``replicas``: lists of blocks built by the same code from data that differ only in mutable Param
        values (the scenarios of a robust design). The first block of a list is printed; the others take its
        forms with their own variables and inputs, matched by their order in component_data_objects, so that
        compiling grows with the forms, not with the blocks. The first and last constraints of every replica
        are printed as a check; a replica that fails it is printed in full.
        ``copies``: templates whose copies are not built in Pyomo at all (nlp.copies); their stores are in
        ``self.copy_stores``, in the same order."""
        t0 = time.perf_counter()
        install_rules()
        self.model = model
        objectives = list(model.component_data_objects(Objective, active=True, descend_into=True))
        if len(objectives) != 1:
            raise ValueError(f"the model needs exactly one active objective, found {len(objectives)}")
        self.objective = objectives[0]
        self.constraints = list(model.component_data_objects(Constraint, active=True, descend_into=True))
        self.variables: list = []
        self.inputs: list = []
        var_ids, input_ids = {}, {}
        groups: dict[tuple, list] = {}
        families = families_of(model)
        # a family template's variable is read as its instance 0's (nlp.families): it never becomes a column
        alias = {id(t): v for fam in families for t, v in zip(fam.variables, fam.instances[0])}

        def global_indices(components, ids, pool):
            out = []
            for c in components:
                k = ids.get(id(c))
                if k is None:
                    c = alias.get(id(c), c) if pool is self.variables else c
                    k = ids.get(id(c))
                    if k is None:
                        k = ids[id(c)] = len(pool)
                        pool.append(c)
                out.append(k)
            return out

        def register(printer):
            return (global_indices(printer.vars, var_ids, self.variables),
                    global_indices(printer.inputs, input_ids, self.inputs))

        def add(source, body, printer, rows, vrows, prows):
            key = (source, len(printer.vars), len(printer.inputs))  # the counts too: a text need not use all
            group = groups.get(key)
            if group is None:
                groups[key] = group = [body, printer, source, [], [], []]
            group[3].extend(rows)
            group[4].append(vrows)
            group[5].append(prows)

        replicas = self._replica_pairs(replicas)  # [(template constraints, replica rows, var pairs, input pairs)]
        deferred = {id(c) for _, cons, _, _ in replicas for c in cons}
        templates = {id(c) for t_cons, _, _, _ in replicas for c in t_cons}
        printed = {}  # id(template constraint) -> (form text, printer, its global variable and input indices)
        texts = {}  # structure key -> (text, printer) of the first constraint with that structure
        self._bound_parts = {}  # row -> (lower, upper): Pyomo builds body and bounds anew at every access
        for row, con in enumerate(self.constraints):
            if id(con) in deferred:
                continue
            lower, body, upper = con.to_bounded_expression()
            self._bound_parts[row] = (lower, upper)
            key, con_vars, con_inputs = structure_key(body)
            known = texts.get(key)
            if known is None:
                printer = _Printer()
                known = texts[key] = (printer.source("value", [body]), printer)
                if ([id(v) for v in printer.vars] != [id(v) for v in con_vars]
                        or [id(p) for p in printer.inputs] != [id(p) for p in con_inputs]):
                    raise RuntimeError(f"the structure walk and the printer order the variables of {con.name} "
                                       "differently")
            text, printer = known
            vrows = global_indices(con_vars, var_ids, self.variables)
            prows = global_indices(con_inputs, input_ids, self.inputs)
            if id(con) in templates:
                printed[id(con)] = (text, printer, vrows, prows)
            add(text, body, printer, [row], vrows, prows)
        row_of = {id(c): r for r, c in enumerate(self.constraints)} if replicas else {}
        for t_cons, cons, var_pairs, input_pairs in replicas:
            # a replica's components take the global indices of their template's, mapped by position
            vmap = np.arange(len(self.variables))
            imap = np.arange(len(self.inputs))
            for pool, ids, remap, pairs in ((self.variables, var_ids, vmap, var_pairs),
                                            (self.inputs, input_ids, imap, input_pairs)):
                for a, b in pairs:
                    g = ids.get(id(a))
                    if g is not None:  # only what the template's constraints use
                        remap[g] = global_indices([b], ids, pool)[0]
            by_form: dict = {}
            for t, c in zip(t_cons, cons):
                key, _, t_vars, t_inputs = printed[id(t)]
                by_form.setdefault((key, len(t_vars), len(t_inputs)), []).append((row_of[id(c)], t))
            for (key, _, _), members in by_form.items():
                _, printer, _, _ = printed[id(members[0][1])]
                t_v = np.array([printed[id(t)][2] for _, t in members], dtype=np.int64).reshape(len(members), -1)
                t_p = np.array([printed[id(t)][3] for _, t in members], dtype=np.int64).reshape(len(members), -1)
                add(key, None, printer, [r for r, _ in members], vmap[t_v], imap[t_p])
        obj_printer = _Printer()
        obj_source = obj_printer.source("value", [self.objective.expr])
        ovars, oinputs = register(obj_printer)
        t_forms = time.perf_counter()
        cache = FormCache()
        self.forms = [_build_form(*group, cache) for group in groups.values()]
        # the model's objective, then (nlp.copies) each template's term over its copies
        self.objective_forms = [_build_form(self.objective.expr, obj_printer, obj_source, [0], [ovars], [oinputs],
                                            cache)]
        self._add_instances(families, var_ids, global_indices)
        self._n_real, self._m_real, self._p_real = len(self.variables), len(self.constraints), len(self.inputs)
        self.copy_stores = []
        for spec in copies:
            self.copy_stores.append(self._attach(spec, cache))
        self.variables, self.inputs, self.constraints = (
            Pool(own, [s.stand_ins[kind] for s in self.copy_stores])
            for kind, own in enumerate((self.variables, self.inputs, self.constraints)))
        self.sign = -1.0 if self.objective.sense == maximize else 1.0
        self._structure()
        self.n, self.m = len(self.variables), len(self.constraints)
        t_compact = time.perf_counter()
        self.compact = LinearElimination(self) if compact else None
        if self.compact is not None and not len(self.compact.removed_rows):
            self.compact = None
        ipopt_n, ipopt_m = self._ipopt_size()
        self.times = {"compile_s": time.perf_counter() - t0, "differentiate_s": t_compact - t_forms,
                      "presolve_s": time.perf_counter() - t_compact, "forms": len(self.forms),
                      "replicated_blocks": self.replicated, "copies": sum(s.count for s in self.copy_stores),
                      "form_cache": cache.summary(),
                      "ipopt_variables": ipopt_n, "ipopt_constraints": ipopt_m}
        self._warm = None
        self._deriv_key, self._deriv_values = None, {}
        self._bound_exprs = None
        self._compact_problem = None  # why the last solve could not use the compact problem

    def _add_instances(self, families, var_ids, global_indices):
        """Every row family's instances beyond the first (nlp.families): new rows taking the template rows'
        forms, their columns those of the instance's variables, appended to ``constraints`` as FamilyRow."""
        if not families:
            return
        row_of = {id(c): r for r, c in enumerate(self.constraints)}
        for fam in families:
            t_cons = list(fam.template.component_data_objects(Constraint, active=True, descend_into=True))
            t_rows = np.array([row_of[id(c)] for c in t_cons], dtype=np.int64)
            count = len(fam.instances) - 1
            if not len(t_rows) or not count:
                continue
            # the template's variables that its rows hold: their instance-0 columns, and every instance's
            col0 = np.array([var_ids.get(id(v), -1) for v in fam.instances[0]], dtype=np.int64)
            used = np.flatnonzero(col0 >= 0)
            fixed = next((chosen[j] for chosen in fam.instances for j in used.tolist() if chosen[j].fixed), None)
            if fixed is not None:
                raise ValueError(f"the row family of {fam.template.name}: its instance variable {fixed.name} is "
                                 "fixed, so its rows would not print as the template's")
            position = np.full(len(self.variables), -1, dtype=np.int64)  # instance-0 column -> used slot
            position[col0[used]] = np.arange(len(used))
            cols = np.array([global_indices([chosen[j] for j in used.tolist()], var_ids, self.variables)
                             for chosen in fam.instances[1:]], dtype=np.int64).reshape(count, len(used))
            def columns(t_index, slot_of=position, cols=cols):
                slot = slot_of[t_index]
                return np.where(slot >= 0, cols[:, np.maximum(slot, 0)], t_index)  # shared columns stay

            self._extend_forms(t_rows, count, columns, lambda t_inputs, count=count: np.tile(t_inputs, (count, 1)))
            parts = [self._bound_part(r) for r in t_rows.tolist()]
            for k in range(1, count + 1):
                for j, c in enumerate(t_cons):
                    self._bound_parts[len(self.constraints)] = parts[j]
                    self.constraints.append(FamilyRow(c, k, fam.label))

    def _extend_forms(self, t_rows, count: int, columns, inputs, first_row: int | None = None):
        """``count`` more instances of the template rows ``t_rows`` in every form that has them (the rows of a
        family's elements, of a template's copies): instance k's rows are first_row + k * len(t_rows) + the
        template row's position (first_row: after every row so far), their columns ``columns(t_index)`` and
        inputs ``inputs(t_inputs)``, arrays (count, template members, width) or (count * members, width)
        from the template members' index matrices."""
        first_row = len(self.constraints) if first_row is None else first_row
        row_local = np.full(first_row, -1, dtype=np.int64)
        row_local[t_rows] = np.arange(len(t_rows))
        for f in self.forms:
            members = np.asarray(f.members, dtype=np.int64)
            pos = np.flatnonzero(row_local[members] >= 0)
            if not len(pos):
                continue
            rows = first_row + np.arange(count)[:, None] * len(t_rows) + row_local[members[pos]]
            f.members = np.concatenate([members, rows.reshape(-1)])
            n_new = rows.size
            f.var_index = np.concatenate([f.var_index, columns(f.var_index[pos]).reshape(n_new, -1)])
            f.input_index = np.concatenate([f.input_index,
                                            inputs(f.input_index[pos]).reshape(n_new, f.input_index.shape[1])])

    def _attach(self, spec: Copies, cache) -> CopyStore:
        """Add ``spec.count`` copies of the template block: new columns, inputs and rows appended to the
        pools, the template rows' forms extended with the copies' members (nlp.copies)."""
        from pyomo.core.base.param import Param
        from pyomo.core.base.var import Var

        block, count = spec.template, int(spec.count)
        if count < 1:
            raise ValueError(f"copies of {block.name}: count must be at least 1, got {spec.count}")
        own_vars = {id(v) for v in block.component_data_objects(Var, descend_into=True)}
        own_inputs = own_vars | {id(p) for p in block.component_data_objects(Param, descend_into=True)}
        own_rows = {id(c) for c in block.component_data_objects(Constraint, active=True, descend_into=True)}
        t_cols = [j for j, v in enumerate(self.variables[:self._n_real]) if id(v) in own_vars]
        t_inputs = [j for j, p in enumerate(self.inputs[:self._p_real]) if id(p) in own_inputs]
        t_rows = [r for r, c in enumerate(self.constraints[:self._m_real]) if id(origin(c)) in own_rows]
        if not t_rows:
            raise ValueError(f"copies of {block.name}: the template has no active constraint of the model")
        bound_parts = [self._bound_part(r) for r in t_rows]
        first_col, first_input, first_row = (  # the stand-ins of the stores attached so far follow the model's
            own + sum(s.count * width(s) for s in self.copy_stores)
            for own, width in ((self._n_real, lambda s: len(s.variables)), (self._p_real, lambda s: len(s.inputs)),
                               (self._m_real, lambda s: len(s.constraints))))
        store = CopyStore(spec, [self.variables[j] for j in t_cols], [self.inputs[j] for j in t_inputs],
                          [self.constraints[r] for r in t_rows], bound_parts, first_col, first_input, first_row,
                          t_cols, t_rows)
        copy = np.arange(count)[:, None]
        vmap = np.tile(np.arange(first_col, dtype=np.int64), (count, 1))  # (copy, column) -> its column
        vmap[:, t_cols] = first_col + copy * len(t_cols) + np.arange(len(t_cols))
        imap = np.tile(np.arange(first_input, dtype=np.int64), (count, 1))
        imap[:, t_inputs] = first_input + copy * len(t_inputs) + np.arange(len(t_inputs))
        self._extend_forms(t_rows, count, lambda t_index: vmap[:, t_index], lambda t_inputs: imap[:, t_inputs],
                           first_row)
        if spec.objective_term is not None:
            printer = _Printer()
            source = printer.source("value", [spec.objective_term])
            column = {id(v): j for j, v in enumerate(self.variables[:self._n_real])}
            slot = {id(p): j for j, p in enumerate(self.inputs[:self._p_real])}
            cols = [column.get(id(v)) for v in printer.vars]
            ins = [slot.get(id(p)) for p in printer.inputs]
            if None in cols or None in ins:
                raise ValueError(f"copies of {block.name}: the objective term holds a variable or input that is "
                                 "in no constraint and not in the model's objective")
            self.objective_forms.append(_build_form(spec.objective_term, printer, source, list(range(count)),
                                                    [vmap[:, cols]], [imap[:, ins]], cache))
        return store

    def _ipopt_size(self) -> tuple[int, int]:
        """Variables and constraints IPOPT sees (after the compact problem and its dangling blocks)."""
        if self.compact is None:
            return self.n, self.m
        cut = self.compact.dangling
        return (cut.n, cut.m) if cut is not None else (self.compact.n, self.compact.m)

    def _replica_pairs(self, replicas) -> list:
        """For every replica that passes the check (see __init__): (its template's constraints, its own in the
        same order, (template var, var) pairs, (template input, input) pairs). Counted in self.replicated."""
        from pyomo.core.base.param import Param
        from pyomo.core.base.var import Var

        def parts(block):
            return (list(block.component_data_objects(Constraint, active=True, descend_into=True)),
                    list(block.component_data_objects(Var, descend_into=True)),
                    list(block.component_data_objects(Param, descend_into=True)))

        def form(con):
            printer = _Printer()
            return printer.source("value", [con.body]), len(printer.vars), len(printer.inputs)

        def constants(params):  # immutable Params are printed as numbers: they must agree
            return [p.value for p in params if not p.parent_component().mutable]

        out = []
        self.replicated = 0
        for blocks in replicas:
            if len(blocks) < 2:
                continue
            t_cons, t_vars, t_params = parts(blocks[0])
            if not t_cons:
                continue
            t_fixed, t_constants = [v.fixed for v in t_vars], constants(t_params)
            ends = (form(t_cons[0]), form(t_cons[-1]))
            for block in blocks[1:]:
                cons, variables, params = parts(block)
                if (len(cons), len(variables), len(params)) != (len(t_cons), len(t_vars), len(t_params)):
                    continue
                if ([v.fixed for v in variables] != t_fixed or constants(params) != t_constants
                        or (form(cons[0]), form(cons[-1])) != ends):
                    continue
                var_pairs = list(zip(t_vars, variables))
                out.append((t_cons, cons, var_pairs, var_pairs + list(zip(t_params, params))))
                self.replicated += 1
        return out

    def _structure(self):
        jr, jc = [], []
        for f in self.forms:
            rows = np.repeat(np.asarray(f.members), f.var_index.shape[1])
            jr.append(rows)
            jc.append(f.var_index.reshape(-1))
        self.jac_rows = np.concatenate(jr) if jr else np.zeros(0, dtype=np.int64)
        self.jac_cols = np.concatenate(jc) if jc else np.zeros(0, dtype=np.int64)
        keys = []  # (row, column) of the lower triangle as one integer, row * n + column: a 1-D unique is fast
        n = max(len(self.variables), 1)
        # a pair whose two variables are the same for every member (variables the members share: a fit's
        # kinetic parameters) is one Hessian entry, the sum of its members' values (_hess): per form with
        # pairs, (pairs entered per member, pairs entered once)
        self._hess_split = []
        for f in [*self.forms, *self.objective_forms]:
            if not f.pairs:
                continue
            same = np.all(f.var_index == f.var_index[:1], axis=0)
            once = np.array([same[a] and same[b] for a, b in f.pairs], dtype=bool)
            split = (np.flatnonzero(~once), np.flatnonzero(once))
            self._hess_split.append(split)
            for p, rows in zip(split, (slice(None), slice(0, 1))):
                for a, b in (f.pairs[q] for q in p.tolist()):
                    i, j = f.var_index[rows, a], f.var_index[rows, b]
                    keys.append(np.maximum(i, j) * n + np.minimum(i, j))
        allk = np.concatenate(keys) if keys else np.zeros(0, dtype=np.int64)
        unique, self._hess_inverse = sorted_unique(allk, return_inverse=True)
        self.hess_rows, self.hess_cols = unique // n, unique % n

    # --- evaluation -------------------------------------------------------------------------------------
    def _args(self, form, x):
        return [x[form.var_index[:, k]] for k in range(form.var_index.shape[1])] + [
            self._p[form.input_index[:, k]] for k in range(form.input_index.shape[1])]

    def _obj(self, x):
        total = 0.0
        for f in self.objective_forms:
            total += float(np.sum(np.broadcast_to(f.fn(*self._args(f, x))[0], (len(f.members),))))
        return self.sign * total

    def _derivatives(self, k, f, x):
        """Gradient and Hessian entries of form ``k`` at x; IPOPT asks for the Jacobian and the Hessian at the
        same point, so the values of the last point are kept."""
        key = x.tobytes()
        if self._deriv_key != key:
            self._deriv_key, self._deriv_values = key, {}
        vals = self._deriv_values.get(k)
        if vals is None:
            vals = self._deriv_values[k] = f.derivatives(*self._args(f, x))
        return vals

    def _grad(self, x):
        g = np.zeros(self.n)
        for i, f in enumerate(self.objective_forms):
            nx = f.var_index.shape[1]
            if not nx:
                continue
            vals = self._derivatives(-1 - i, f, x)[:nx]
            g += np.bincount(f.var_index.T.reshape(-1), weights=_rows(vals, len(f.members)).reshape(-1),
                             minlength=self.n)
        return self.sign * g

    def _cons(self, x):
        out = np.empty(self.m)
        for f in self.forms:
            out[f.members] = f.fn(*self._args(f, x))[0]
        return out

    def _jac(self, x, wanted=None):
        """The Jacobian entries at x. ``wanted``: a mask of the rows asked for; a form with none of them gives
        zeros (the rows the presolve took out of IPOPT's problem need not be evaluated for it)."""
        parts = []
        for k, f in enumerate(self.forms):
            if wanted is not None and not wanted[f.members].any():
                parts.append(np.zeros(f.var_index.size))
                continue
            vals = self._derivatives(k, f, x)[: f.var_index.shape[1]]
            parts.append(_rows(vals, len(f.members)).T.reshape(-1))
        return np.concatenate(parts) if parts else np.zeros(0)

    def _hess(self, x, lagrange, obj_factor):
        parts = []
        split = iter(self._hess_split)  # the forms with pairs, in _structure's order
        for k, f in [*enumerate(self.forms), *((-1 - i, f) for i, f in enumerate(self.objective_forms))]:
            if not f.pairs:
                continue
            per_member, once = next(split)
            w = lagrange[f.members] if k >= 0 else obj_factor * self.sign
            if k >= 0 and not w.any():  # rows out of IPOPT's problem, or inactive: nothing to add
                parts.append(np.zeros(len(per_member) * len(f.members) + len(once)))
                continue
            vals = _rows(self._derivatives(k, f, x)[f.n_grad:], len(f.members)) * w  # (pair, member)
            parts.append(vals[per_member].reshape(-1))
            parts.append(vals[once].sum(axis=1))
        if not parts:
            return np.zeros(len(self.hess_rows))
        return np.bincount(self._hess_inverse, weights=np.concatenate(parts), minlength=len(self.hess_rows))

    # --- solving ----------------------------------------------------------------------------------------
    def refresh(self):
        """Read inputs, variable bounds and constraint bounds from the model."""
        stores = self.copy_stores  # the copies' values are arrays already
        self._p = np.concatenate([np.array([value(p) for p in self.inputs[:self._p_real]], dtype=float),
                                  *[s.p.reshape(-1) for s in stores]])
        self._deriv_key, self._deriv_values = None, {}  # inputs changed: forget cached derivatives
        self.x_lb, self.x_ub = self.variable_bounds()
        if self._bound_exprs is None:
            self._constraint_bounds()
        g_lb, g_ub = self._g_lb_const.copy(), self._g_ub_const.copy()
        for bounds, (rows, exprs) in zip((g_lb, g_ub), self._bound_exprs):
            bounds[rows] = exprs.values()
        self.g_lb = np.concatenate([g_lb, *[s.g_lb.reshape(-1) for s in stores]])
        self.g_ub = np.concatenate([g_ub, *[s.g_ub.reshape(-1) for s in stores]])

    @property
    def model_size(self) -> tuple[int, int]:
        """(variables, constraints) of the Pyomo model itself: the first entries of ``variables`` and
        ``constraints``, before the copies' stand-ins (nlp.copies)."""
        return self._n_real, self._m_real

    def equality_rows(self) -> np.ndarray:
        """Per row, whether it is an equality (Pyomo's flag, a copy's from its template row)."""
        return np.concatenate([np.array([c.equality for c in self.constraints[:self._m_real]], dtype=bool),
                               *[np.tile([c.equality for c in s.constraints], s.count) for s in self.copy_stores]])

    def variable_bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """(lower, upper) of every variable as the model and the copies' stores hold them now (+-INFINITY)."""
        lower, upper = variable_bounds(self.variables[:self._n_real])
        return (np.concatenate([lower, *[s.lb.reshape(-1) for s in self.copy_stores]]),
                np.concatenate([upper, *[s.ub.reshape(-1) for s in self.copy_stores]]))

    def component_labels(self) -> np.ndarray:
        """A label per variable: its indexed Pyomo component; a copy's variables by copy and component."""
        ids: dict = {}
        labels = [np.array([ids.setdefault(id(v.parent_component()), len(ids)) for v in self.variables[:self._n_real]],
                           dtype=np.int64)]
        start = len(ids)
        for s in self.copy_stores:
            components, local = np.unique(labels[0][s.template_columns], return_inverse=True)
            labels.append((start + np.arange(s.count)[:, None] * len(components) + local).reshape(-1))
            start += s.count * len(components)
        return np.concatenate(labels)

    def _constraint_bounds(self):
        """Constraint bounds that are numbers are read once; those with inputs (mutable Params, fixed Vars)
        at every refresh. A constraint's expression cannot change without a new CompiledNLP anyway."""
        parts = [self._bound_part(row) for row in range(self._m_real)]
        self._bound_parts = {}  # read once: not needed again
        (self._g_lb_const, self._g_ub_const), self._bound_exprs = split_bounds(parts)

    def _bound_part(self, row: int) -> tuple:
        """(lower, upper) of a model row as Pyomo gives them, kept from the compilation's walk when it read
        them (Pyomo builds body and bounds anew at every access)."""
        part = self._bound_parts.get(row)
        if part is None:
            lower, _, upper = self.constraints[row].to_bounded_expression()
            part = (lower, upper)
        return part

    on_iteration = None  # optional f(iteration, objective, primal infeasibility), called by IPOPT every iteration

    def current_point(self, clip: bool = True) -> np.ndarray:
        """The variables' values (the copies' from their stores), within the bounds read last if ``clip``."""
        x = np.concatenate([np.array([0.0 if v.value is None else v.value for v in self.variables[:self._n_real]],
                                     dtype=float), *[s.x.reshape(-1) for s in self.copy_stores]])
        return np.clip(x, self.x_lb, self.x_ub) if clip else x

    def _write(self, x: np.ndarray):
        """The point x into the model's variables and the copies' stores."""
        for v, xv in zip(self.variables[:self._n_real], x[:self._n_real].tolist()):
            v.set_value(xv, skip_validation=True)
        for s in self.copy_stores:
            s.x[:] = x[s.first_column:s.first_column + s.x.size].reshape(s.x.shape)

    def solve(self, options: dict | None = None, warm_start: bool = False, scaling=None,
              dangling: bool = True, multipliers: bool = True) -> SolveOutcome:
        """Solve from the model's current variable values. ``warm_start`` reuses the multipliers of the
        previous solve. ``scaling``: (objective factor, variable factors, constraint factors) or None.
        ``dangling``: leave the compact problem's dangling blocks (nlp.dangling) out of IPOPT's problem; when
        a block cannot be solved from its rows afterwards, or its values leave a bound, the problem is solved
        again with them (``times["dangling_fallback"]`` says why). ``multipliers=False``: the presolve's
        removed rows get NaN multipliers instead of their values from stationarity (a caller that reads no
        multiplier saves a sparse solve), and the next solve cannot start warm from this one.
        Writes the solution back into the model's variables."""
        import cyipopt

        t0 = time.perf_counter()
        self.refresh()
        timer = {"callbacks_s": 0.0}
        outer = self
        iterations = [0]

        def timed(fn):
            def wrapper(*args):
                t = time.perf_counter()
                try:  # trial points outside the domain give NaN, which IPOPT answers with a shorter step
                    with np.errstate(all="ignore"):
                        return fn(*args)
                finally:
                    timer["callbacks_s"] += time.perf_counter() - t
            return wrapper

        x0 = self.current_point()
        red = self._reduction(x0)
        if red is None:
            calls = (self._obj, self._grad, self._cons, self._jac, self._hess)
            jac_structure, hess_structure = (self.jac_rows, self.jac_cols), (self.hess_rows, self.hess_cols)
            cols, rows = slice(None), slice(None)
        else:
            wanted = np.zeros(self.m, dtype=bool)
            wanted[red.kept_rows] = True
            calls = (red.objective, red.gradient, red.constraints, lambda y: red.jacobian(y, wanted), red.hessian)
            jac_structure, hess_structure = (red.jac_rows, red.jac_cols), (red.hess_rows, red.hess_cols)
            cols, rows = red.kept, red.kept_rows
        cut = red.dangling if red is not None and dangling else None
        if cut is not None and not cut.applies(self.g_lb[red.kept_rows], self.g_ub[red.kept_rows]):
            cut = None
        if cut is not None:  # IPOPT's point z holds the compact problem's variables but the block's
            y_block = x0[red.kept][cut.cols]
            compact_calls = calls
            wanted[red.kept_rows[cut.rows]] = False

            def expand(z):
                return cut.expand(z, y_block)

            def hessian(z, lagrange, obj_factor):
                compact_lagrange = np.zeros(red.m)
                compact_lagrange[cut.keep_rows] = lagrange
                return compact_calls[4](expand(z), compact_lagrange, obj_factor)[cut.hess_mask]

            calls = (lambda z: compact_calls[0](expand(z)), lambda z: compact_calls[1](expand(z))[cut.keep_cols],
                     lambda z: compact_calls[2](expand(z))[cut.keep_rows],
                     lambda z: compact_calls[3](expand(z))[cut.jac_mask], hessian)
            jac_structure, hess_structure = (cut.jac_rows, cut.jac_cols), (cut.hess_rows, cut.hess_cols)
            cols, rows = red.kept[cut.keep_cols], red.kept_rows[cut.keep_rows]

        class _Problem:
            objective = staticmethod(timed(calls[0]))
            gradient = staticmethod(timed(calls[1]))
            constraints = staticmethod(timed(calls[2]))
            jacobian = staticmethod(timed(calls[3]))
            hessian = staticmethod(timed(calls[4]))

            def jacobianstructure(self):
                return jac_structure

            def hessianstructure(self):
                return hess_structure

            def intermediate(self, alg_mod, iter_count, obj_value, inf_pr, *args):
                iterations[0] = iter_count
                if outer.on_iteration is not None:
                    outer.on_iteration(int(iter_count), outer.sign * float(obj_value), float(inf_pr))
                return True

        problem = cyipopt.Problem(n=len(self.x_lb[cols]), m=len(self.g_lb[rows]), problem_obj=_Problem(),
                                  lb=self.x_lb[cols], ub=self.x_ub[cols], cl=self.g_lb[rows], cu=self.g_ub[rows])
        opts = {"print_level": 0, "sb": "yes", "tol": 1e-8, "max_iter": 3000}
        if os.environ.get("TUBEWRIGHT_IPOPT_LOG"):  # for developers: IPOPT's own iteration log on stdout
            opts.update(print_level=5, sb="no", print_timing_statistics="yes")
        if scaling is not None:
            obj_s, x_s, g_s = scaling
            problem.set_problem_scaling(obj_scaling=obj_s, x_scaling=np.asarray(x_s, float)[cols],
                                        g_scaling=np.asarray(g_s, float)[rows])
            opts["nlp_scaling_method"] = "user-scaling"
        kwargs = {}
        if warm_start and self._warm is not None:
            opts.update({"warm_start_init_point": "yes", "warm_start_bound_push": 1e-9,
                         "warm_start_mult_bound_push": 1e-9, "mu_init": 1e-6})
            kwargs = {"lagrange": self._warm[0][rows], "zl": self._warm[1][cols], "zu": self._warm[2][cols]}
        opts.update(options or {})
        for key, val in opts.items():
            problem.add_option(key, val)
        try:
            y, info = problem.solve(x0[cols], **kwargs)
        finally:
            problem.close()
        if red is None:
            x, mult_g = np.asarray(y), np.asarray(info["mult_g"])
            zl, zu = np.asarray(info["mult_x_L"]), np.asarray(info["mult_x_U"])
        else:  # the whole model's point and multipliers (eliminated variables have no bounds)
            y = np.asarray(y)
            if cut is not None:  # the block's variables from its rows; their multipliers are zero
                y, solved = cut.recover(cut.expand(y, y_block), red.constraints, red.jacobian,
                                        self.g_lb[red.kept_rows])
                problem = ("Newton's method did not solve the block" if not solved else
                           None if cut.within(y, self.x_lb[red.kept], self.x_ub[red.kept]) else
                           "the block's values leave a bound")
                if problem is not None:
                    self._write(red.full(y))
                    again = self.solve(options, warm_start=False, scaling=scaling, dangling=False,
                                       multipliers=multipliers)
                    again.times["dangling_fallback"] = problem
                    return again
            x = red.full(y)
            mult_g, zl, zu = np.zeros(self.m), np.zeros(self.n), np.zeros(self.n)
            mult_g[rows] = info["mult_g"]
            zl[cols], zu[cols] = info["mult_x_L"], info["mult_x_U"]
            if multipliers:
                with np.errstate(all="ignore"):
                    mult_g[red.removed_rows] = red.defining_multipliers(x, mult_g[red.kept_rows])
            else:
                mult_g[red.removed_rows] = np.nan
        total = time.perf_counter() - t0
        self._write(x)
        with np.errstate(all="ignore"):
            g = self._cons(x)
        viol = float(np.max(np.concatenate([[0.0], self.g_lb - g, g - self.g_ub]))) if self.m else 0.0
        status = int(info["status"])
        self._warm = (mult_g, zl, zu) if multipliers else None
        msg = info["status_msg"]
        return SolveOutcome(
            status=status, status_name=IPOPT_STATUS.get(status, "unknown"),
            message=msg.decode() if isinstance(msg, bytes) else str(msg), success=status in (0, 1),
            iterations=iterations[0], objective=self.sign * float(info["obj_val"]), constraint_violation=viol,
            x=x, multipliers=mult_g, bound_multipliers_lower=zl, bound_multipliers_upper=zu,
            times={"compile_s": self.times["compile_s"], "callbacks_s": timer["callbacks_s"],
                   "ipopt_s": total - timer["callbacks_s"], "solve_s": total,
                   **({"compact_fallback": self._compact_problem} if self._compact_problem else {})})

    def _reduction(self, x0):
        """The compact problem when it still applies to the current bounds (its removed rows are still
        equalities, its eliminated variables still free, its determined blocks solvable and inside their
        bounds), with its values read at x0; else None (``times["compact_fallback"]`` of the solve says why)."""
        red = self.compact
        self._compact_problem = None
        if red is None:
            return None
        if (np.any(self.g_lb[red.removed_rows] != self.g_ub[red.removed_rows])
                or np.any(self.x_lb[red.eliminated] > -INFINITY) or np.any(self.x_ub[red.eliminated] < INFINITY)):
            self._compact_problem = "a removed row is no longer an equality or an eliminated variable has a bound"
            return None
        red.refresh(x0, self.g_lb)
        cols, values = red.block_cols, red.block_values
        if red.block_problem is None and (np.any(values < self.x_lb[cols]) or np.any(values > self.x_ub[cols])):
            red.block_problem = "a determined block's values leave a bound"
        if red.block_problem is not None:
            self._compact_problem = red.block_problem
            return None
        return red

    def objective_value(self) -> float:
        """The objective at the model's current values (the copies' terms included), in the model's sense."""
        self.refresh()
        with np.errstate(all="ignore"):
            return self.sign * self._obj(self.current_point())

    def multiplier(self, constraint) -> float:
        """IPOPT's multiplier of one constraint after a solve (Lagrangian f + lambda^T g)."""
        if self._warm is None:
            raise RuntimeError("no multipliers: nothing solved yet, or the last solve asked for none "
                               "(multipliers=False)")
        return float(self._warm[0][self.constraints.index(constraint)])
