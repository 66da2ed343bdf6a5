"""Row families: the rows of one small template block, repeated over many sets of the model's own variables.

A collocation model's balance rows are alike from one finite element to the next: the same equations on the
next element's states. Building every element's rows in Pyomo (and walking them to find their forms) costs
time in proportion to the mesh although the forms do not change with it. A family builds them once: the
template block holds one element's rows written on its own variables; ``instances`` lists, per element, the
model's variables that stand for the template's (in the order of ``variables``). The bridge compiles the
template's rows once, as instance 0's (the template's variables are never columns of the problem: each is
read as instance 0's variable), and adds every other instance as index arithmetic: new rows taking the
template rows' forms, with the instance's columns. Inputs (mutable Params, fixed Vars) are shared by all
instances, and so is any variable of the model that the template's rows hold directly (a free tube length).

A block declares its families with ``declare_family``; ``CompiledNLP`` finds them in the model and its
active blocks. The caller's promise: instance k's rows are the template's with every template variable
replaced by instance k's variable (the bridge refuses a fixed instance variable, whose rows would print
otherwise). Deactivating a template row drops it from every instance. The template's rows are evaluated by
the bridge only: in Pyomo they hold the template's own variables, whose values mean nothing.

The added rows appear in ``CompiledNLP.constraints`` as ``FamilyRow`` stand-ins; ``origin`` gives the
Pyomo row a row stands for (its template row), for callers that key scale factors by constraint."""

from __future__ import annotations

from dataclasses import dataclass

from pyomo.core.base.block import Block


@dataclass
class RowFamily:
    """The active rows of ``template`` once per entry of ``instances`` (lists of the model's variables in the
    order of ``variables``, the template's). ``label`` names an instance in row names ("element")."""

    template: object
    variables: list
    instances: list
    label: str = "instance"

    def __post_init__(self):
        if not self.instances:
            raise ValueError(f"the row family of {self.template.name} has no instance")
        for k, chosen in enumerate(self.instances):
            if len(chosen) != len(self.variables):
                raise ValueError(f"the row family of {self.template.name}: instance {k} lists {len(chosen)} "
                                 f"variables for the template's {len(self.variables)}")


class FamilyRow:
    """Instance ``instance`` (1.. ; 0 is the template's own row) of a template row: what the bridge reads of a
    row (name, equality, bounds)."""

    __slots__ = ("template", "instance", "label")

    def __init__(self, template, instance: int, label: str):
        self.template, self.instance, self.label = template, instance, label

    @property
    def name(self) -> str:
        return f"{self.template.name} ({self.label} {self.instance + 1})"

    @property
    def equality(self) -> bool:
        return self.template.equality

    def to_bounded_expression(self):
        return self.template.to_bounded_expression()


def declare_family(block, family: RowFamily):
    """Register ``family`` with ``block`` (the model or any block of it), for ``CompiledNLP`` to find."""
    block.row_families = [*getattr(block, "row_families", ()), family]


def families_of(model) -> list[RowFamily]:
    """The row families declared on the model and on its active blocks, in the order of the blocks."""
    found = list(getattr(model, "row_families", ()))
    for block in model.component_data_objects(Block, active=True, descend_into=True):
        found.extend(getattr(block, "row_families", ()))
    return found


def origin(row):
    """The Pyomo constraint a row of ``CompiledNLP.constraints`` stands for: a family instance's template row,
    else the row itself."""
    return row.template if isinstance(row, FamilyRow) else row
