"""The small math backend that every balance and correlation is written against.

A backend is a namespace with ``exp``, ``log``, ``sqrt`` and ``where(condition, a, b)``. Arithmetic
operators (``+ - * / **``) are used directly. With ``NUMPY`` the physics yields numbers (scalars, or arrays
for many samples at once); with ``pyomo_backend()`` the same functions yield Pyomo expressions for the
collocation model. No physics function may branch on the value of a state variable with ``if``: such
branches would differ between the two backends; piecewise physics (two-range heat-capacity polynomials)
goes through ``where``.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

NUMPY = SimpleNamespace(name="numpy", exp=np.exp, log=np.log, sqrt=np.sqrt, where=np.where)


def pyomo_backend():
    """The Pyomo backend (imported on demand so that the simulator does not pay for Pyomo)."""
    from pyomo.core import Expr_if, exp, log, sqrt

    def where(condition, a, b):
        return Expr_if(IF=condition, THEN=a, ELSE=b)

    return SimpleNamespace(name="pyomo", exp=exp, log=log, sqrt=sqrt, where=where)
