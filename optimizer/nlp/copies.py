"""Virtual copies of a template block: many blocks of one shape, built once.

A fit has one tube block per laboratory run, a robust design one per scenario: blocks built by the same
code, differing only in input values (mutable Params, fixed Vars), variable bounds, constraint bounds that
are input expressions, and starting values. Building each in Pyomo costs tens of milliseconds per block;
here the template block alone is built and the bridge adds ``count`` copies of it as index arithmetic:

- every variable of the template (a Var data object inside the block) gets a new column per copy, every
  input of the template a new input, every active constraint of the template a new row, taking the
  template's forms (its members' index matrices, remapped). Variables and inputs outside the block are
  shared by all copies (the kinetic parameters of a fit);
- ``objective_term``, an expression of the template's (and shared) variables, is added to the objective
  once per copy: the model's objective holds the template's own term;
- a copy's values live in arrays (``CopyStore``); the caller sets the template to a copy's data (inputs,
  bounds, starting values) and calls ``store.capture(k)``; ``with store.loaded(k):`` puts a copy's
  values into the template for as long as the block needs them (to evaluate an expression of the template
  at the copy). The stores are ``CompiledNLP.copy_stores``, in the order of the ``copies`` given.

The rows, columns and inputs of the copies are listed in ``CompiledNLP.constraints``, ``variables`` and
``inputs`` (``Pool``s) as light stand-ins (``CopyVar``, ``CopyInput``, ``CopyConstraint``) with the
attributes the rest of the code reads (value, bounds, equality, name), each made when first read.

What makes a block a copy is the caller's promise: that the template built from the copy's data would
print to the same forms. A caller keeps it by grouping only blocks whose construction depends on nothing
but what becomes inputs and bounds (see ``optimizer.design.collocation.replica_key``)."""

from __future__ import annotations

from collections.abc import Sequence
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np
from pyomo.core import value
from tubewright.optimizer.nlp.structure import INFINITY, split_bounds, variable_bounds


@dataclass
class Copies:
    """``count`` copies of ``template`` (a block of the compiled model) beyond the template itself."""

    template: object
    count: int
    objective_term: object = None  # an expression of the template: each copy adds its value to the objective


class CopyStore:
    """The values of the copies of one template: row k - 1 of each array holds copy k (k = 1..count)."""

    def __init__(self, spec: Copies, variables, inputs, constraints, bound_parts, first_column, first_input,
                 first_row, template_columns, template_rows):
        """``bound_parts``: per template row its (lower, upper) bound as Pyomo gives them (None, a number or
        an expression with inputs): the expressions are evaluated per copy, the rest are the same for all.
        ``template_columns``, ``template_rows``: the template's variables and rows in the compiled problem."""
        self.count = k = spec.count
        self.template_columns = np.asarray(template_columns, dtype=np.int64)
        self.template_rows = np.asarray(template_rows, dtype=np.int64)
        self.variables, self.inputs, self.constraints = variables, inputs, constraints  # the template's
        self.first_column, self.first_input, self.first_row = first_column, first_input, first_row
        template_bounds, self.live_bounds = split_bounds(bound_parts)
        nv = len(variables)
        self.x, self.lb, self.ub, self.p = (np.empty((k, nv)), np.empty((k, nv)), np.empty((k, nv)),
                                            np.empty((k, len(inputs))))
        self.g_lb = np.tile(template_bounds[0], (k, 1))
        self.g_ub = np.tile(template_bounds[1], (k, 1))
        self._read(0)
        for array in (self.x, self.lb, self.ub, self.p, self.g_lb, self.g_ub):
            array[1:] = array[0]  # every copy starts as the template is now
        self.variable_position = {id(v): j for j, v in enumerate(variables)}
        self.row_position = {id(c): j for j, c in enumerate(constraints)}
        self.stand_ins = (StandIns(self, CopyVar, nv), StandIns(self, CopyInput, len(inputs)),
                          StandIns(self, CopyConstraint, len(constraints)))

    def _read(self, row: int, values=None, bounds: bool = True):
        self.x[row] = [_number(v.value) for v in self.variables] if values is None else values
        if bounds:
            self.lb[row], self.ub[row] = variable_bounds(self.variables)
        self.p[row] = [_number(value(p)) for p in self.inputs]
        for side, (rows, exprs) in zip((self.g_lb, self.g_ub), self.live_bounds):
            side[row, rows] = exprs.values()

    def capture(self, k: int, values=None, bounds: bool = True):
        """The template's current inputs, variable values and bounds, and input-dependent constraint bounds,
        as copy ``k``'s (1..count). ``values``: the copy's variable values, in the order of ``variables``,
        instead of the template's (a caller that computes them as arrays need not write them into Pyomo).
        ``bounds=False``: the copy keeps the variable bounds it holds (the template's when the store was
        made, unless captured since), for a caller that changes no variable bound between copies (reading
        them costs a Pyomo property call per variable)."""
        self._read(self._row(k), values, bounds)

    @contextmanager
    def loaded(self, k: int, variables=None):
        """Within the block, the template's variables and inputs hold copy ``k``'s values (0: its own).
        ``variables``: only these of the template's (an expression's), the others left as they are."""
        if k == 0:
            yield
            return
        row = self._row(k)
        if variables is None:
            positions = range(len(self.variables))
        else:
            positions = sorted({self.variable_position[id(v)] for v in variables if id(v) in self.variable_position})
        chosen = [self.variables[j] for j in positions]
        saved_x = [v.value for v in chosen]
        saved_p = [p.value for p in self.inputs]
        try:
            for v, x in zip(chosen, self.x[row, list(positions)].tolist()):
                v.set_value(x, skip_validation=True)
            for p, x in zip(self.inputs, self.p[row].tolist()):
                _set_input(p, x)
            yield
        finally:
            for v, x in zip(chosen, saved_x):
                v.set_value(x, skip_validation=True)
            for p, x in zip(self.inputs, saved_p):
                _set_input(p, x)

    def column(self, k: int, variable) -> int | None:
        """The column of copy ``k``'s instance of a template variable, or None when it is not the template's."""
        j = self.variable_position.get(id(variable))
        return None if j is None else self.columns(k).start + j

    def instance(self, k: int, component):
        """Copy ``k``'s stand-in for a template variable or constraint (None if not the template's)."""
        row = self._row(k)
        j = self.variable_position.get(id(component))
        if j is not None:
            return self.stand_ins[0][row * len(self.variables) + j]
        j = self.row_position.get(id(component))
        return None if j is None else self.stand_ins[2][row * len(self.constraints) + j]

    def columns(self, k: int) -> slice:
        """Copy ``k``'s columns in the compiled problem, in the order of the template's ``variables``."""
        start = self.first_column + self._row(k) * len(self.variables)
        return slice(start, start + len(self.variables))

    def rows(self, k: int) -> slice:
        """Copy ``k``'s rows in the compiled problem, in the order of the template's ``constraints``."""
        start = self.first_row + self._row(k) * len(self.constraints)
        return slice(start, start + len(self.constraints))

    def all_rows(self) -> slice:
        """The rows of every copy in the compiled problem (copy after copy)."""
        return slice(self.first_row, self.first_row + self.count * len(self.constraints))

    def _row(self, k: int) -> int:
        if not 1 <= k <= self.count:
            raise IndexError(f"copy {k} of a template with {self.count} copies (1..{self.count})")
        return k - 1


def _number(v) -> float:
    return 0.0 if v is None else float(v)


def _set_input(p, x):
    if p.is_variable_type():
        p.set_value(x, skip_validation=True)
    else:
        p.set_value(x)


class StandIns(Sequence):
    """The stand-ins of one kind of a store, copy after copy (copy k's of template item j at k * width + j,
    k counted from 0), each made on first use and kept, so that it keeps its identity: a fit of many runs
    reads few of its hundreds of thousands."""

    def __init__(self, store, cls, width: int):
        self.store, self.cls, self.width = store, cls, width
        self._made = [None] * (store.count * width)

    def __len__(self) -> int:
        return len(self._made)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[j] for j in range(*i.indices(len(self)))]
        made = self._made[i]  # IndexError beyond the end, as a list
        if made is None:
            i %= len(self._made)
            made = self._made[i] = self.cls(self.store, *divmod(i, self.width))
        return made

    def position(self, item) -> int | None:
        """The position of one of these stand-ins, without searching; None for anything else."""
        if type(item) is not self.cls or item.store is not self.store:
            return None
        return item.k * self.width + item.j


class Pool(Sequence):
    """``CompiledNLP.variables``, ``inputs`` or ``constraints``: the model's own items (a list), then the
    copies' stand-ins (StandIns of each store), as one sequence."""

    def __init__(self, own: list, tails=()):
        self.own, self.tails = own, list(tails)
        self._len = len(own) + sum(len(t) for t in self.tails)

    def __len__(self) -> int:
        return self._len

    def __getitem__(self, i):
        if isinstance(i, slice):
            start, stop, step = i.indices(self._len)
            if step == 1 and stop <= len(self.own):
                return self.own[start:stop]
            return [self[j] for j in range(start, stop, step)]
        if i < 0:
            i += self._len
        if 0 <= i < len(self.own):
            return self.own[i]
        i -= len(self.own)
        for tail in self.tails:
            if 0 <= i < len(tail):
                return tail[i]
            i -= len(tail)
        raise IndexError("pool index out of range")

    def __iter__(self):
        yield from self.own
        for tail in self.tails:
            yield from tail

    def index(self, item) -> int:
        offset = len(self.own)
        for tail in self.tails:
            k = tail.position(item)
            if k is not None:
                return offset + k
            offset += len(tail)
        return self.own.index(item)


class _StandIn:
    """Copy ``k``'s instance (k counted from 0 in the store's arrays) of the template's item ``j`` in the
    store's list named by ``_pool``."""

    __slots__ = ("store", "k", "j")
    _pool = ""

    def __init__(self, store, k, j):
        self.store, self.k, self.j = store, k, j

    @property
    def name(self) -> str:
        return f"{getattr(self.store, self._pool)[self.j].name} (copy {self.k + 1})"


class CopyVar(_StandIn):
    __slots__ = ()
    _pool = "variables"
    fixed = False

    @property
    def value(self) -> float:
        return float(self.store.x[self.k, self.j])

    def set_value(self, x, skip_validation: bool = False):
        self.store.x[self.k, self.j] = x

    @property
    def bounds(self):
        lo, up = self.store.lb[self.k, self.j], self.store.ub[self.k, self.j]
        return (None if lo <= -INFINITY else float(lo), None if up >= INFINITY else float(up))


class CopyInput(_StandIn):
    __slots__ = ()
    _pool = "inputs"

    @property
    def value(self) -> float:
        return float(self.store.p[self.k, self.j])


class CopyConstraint(_StandIn):
    __slots__ = ()
    _pool = "constraints"

    @property
    def equality(self) -> bool:
        return self.store.constraints[self.j].equality
