"""Differentiation rules the bridge adds to Pyomo's reverse symbolic differentiation.

Pyomo (6.7 to 6.x) has no rule for ``Expr_if`` (the balances use it for piecewise cp polynomials) nor for
relational nodes (its conditions). The derivative of Expr_if(c, a, b) is Expr_if(c, da, db), and a
condition contributes no derivative. Pyomo keeps its rules in a private table of
``pyomo.core.expr.calculus.diff_with_pyomo``; ``install_rules`` adds ours there explicitly (the bridge
calls it when it compiles a model, never at import), only for node types that have no rule yet
(idempotent, and a rule Pyomo may bring later wins), after checking the Pyomo version it was written for.
"""

from __future__ import annotations

from pyomo.core import Expr_if

SUPPORTED_PYOMO = ((6, 7), (7, 0))  # [from, to): the versions whose private rule table this was checked on


class PyomoVersionError(RuntimeError):
    """The installed Pyomo is outside the versions whose differentiation table the bridge knows."""


def _diff_expr_if(node, val_dict, der_dict):
    der = der_dict[node]
    cond, then, other = node.args
    der_dict[then] += der * Expr_if(IF=cond, THEN=1.0, ELSE=0.0)
    der_dict[other] += der * Expr_if(IF=cond, THEN=0.0, ELSE=1.0)


def _diff_nothing(node, val_dict, der_dict):
    return None


def _version(text: str) -> tuple:
    parts = []
    for piece in text.split(".")[:2]:
        digits = "".join(ch for ch in piece if ch.isdigit())
        parts.append(int(digits or 0))
    return tuple(parts)


def install_rules() -> None:
    """Add the Expr_if and relational rules to Pyomo's differentiation table (idempotent)."""
    import pyomo
    import pyomo.core.expr as EXPR
    import pyomo.core.expr.calculus.diff_with_pyomo as diff

    have = _version(pyomo.version.version)
    low, high = SUPPORTED_PYOMO
    table = getattr(diff, "_diff_map", None)
    if not (low <= have < high) or not isinstance(table, dict):
        raise PyomoVersionError(f"Pyomo {pyomo.version.version}: the bridge's differentiation rules were checked "
                                f"on Pyomo {low[0]}.{low[1]} up to (not including) {high[0]}.{high[1]}")
    table.setdefault(EXPR.Expr_ifExpression, _diff_expr_if)
    for relation in (EXPR.InequalityExpression, EXPR.EqualityExpression, EXPR.RangedExpression):
        table.setdefault(relation, _diff_nothing)
