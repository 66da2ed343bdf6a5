"""Modules that stand deferred in ``sys.modules`` until first used.

Pyomo registers post-import callbacks (pyomo.common.dependencies): once Pyomo is loaded, importing scipy also
imports scipy.stats and scipy.spatial "to assume they are present" (0.5-0.8 s per process: scipy.stats builds
its distributions' docstrings at import), and importing matplotlib also imports matplotlib.pyplot and
matplotlib.pylab (0.1-0.3 s). tubewright uses scipy.stats only in screening, fitting and robust verification,
scipy.spatial and pyplot not at all (its figures are drawn on an Agg canvas). A deferred stand-in makes those
import statements find the module and execute nothing; whoever uses the module gets the real one."""

from __future__ import annotations

import importlib.machinery
import importlib.util
import sys
import types
from importlib import import_module


class DeferredModule(types.ModuleType):
    """Stands in sys.modules for a module not yet executed. It carries the module's spec, so that the
    statement ``import a.b`` finds it and executes nothing, and executes the real module on the first other
    attribute asked of it, then forwards every attribute to it. Its ``__path__`` is such an attribute: the
    import of a submodule (``import a.b.c``) executes the real package first, as without the stand-in (its
    ``__init__`` may import that submodule itself). (importlib.util.LazyLoader does not serve: Python 3.11's
    import statement reads ``__spec__`` of a module found in sys.modules, which executes a lazy module.)"""

    def __init__(self, spec):
        super().__init__(spec.name)
        self.__spec__, self.__loader__, self.__file__ = spec, spec.loader, spec.origin
        self.__package__ = spec.name if spec.submodule_search_locations is not None else spec.parent

    def _real(self):
        name = self.__name__
        if sys.modules.get(name) is self:
            del sys.modules[name]
            try:
                real = import_module(name)
            except BaseException:
                sys.modules[name] = self  # stays deferred: the next use tries again and raises the same
                raise
            parent, _, child = name.rpartition(".")
            if parent in sys.modules:
                setattr(sys.modules[parent], child, real)
        return sys.modules[name]

    def __getattr__(self, attribute):
        return getattr(self._real(), attribute)

    def __dir__(self):
        return dir(self._real())


def find_spec_unexecuted(name: str):
    """The spec of module ``name`` without executing its parent packages (``importlib.util.find_spec`` of a
    submodule imports its parent): the parents' specs give the folders to search. None if not found."""
    parent, _, _ = name.rpartition(".")
    if not parent or parent in sys.modules:
        return importlib.util.find_spec(name)
    parent_spec = find_spec_unexecuted(parent)
    if parent_spec is None or parent_spec.submodule_search_locations is None:
        return None
    return importlib.machinery.PathFinder.find_spec(name, parent_spec.submodule_search_locations)


def defer_modules(names) -> None:
    """Stand a DeferredModule in for each of these modules; skipped for a module already imported (or
    standing in), or one not installed."""
    for name in names:
        if name in sys.modules:
            continue
        spec = find_spec_unexecuted(name)
        if spec is not None and spec.loader is not None:
            sys.modules[name] = DeferredModule(spec)
