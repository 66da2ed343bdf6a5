"""Modules that stand deferred in ``sys.modules`` until first used.

Pyomo registers post-import callbacks (pyomo.common.dependencies): once Pyomo is loaded, importing scipy also
imports scipy.stats and scipy.spatial "to assume they are present" (0.5-0.8 s per process: scipy.stats builds
its distributions' docstrings at import), and importing matplotlib also imports matplotlib.pyplot and
matplotlib.pylab (0.1-0.3 s). tubewright uses scipy.stats only in screening, fitting and robust verification,
scipy.spatial and pyplot not at all (its figures are drawn on an Agg canvas). A deferred stand-in makes those
import statements find the module and execute nothing; whoever uses the module gets the real one.

numpy's submodules f2py, ma, polynomial and testing are in ``numpy.__all__``, so scipy's array-API layer
(imported by scipy.special, hence by scipy.integrate and scipy.optimize) executes them all with its ``from numpy
import *``, and Pyomo imports numpy.testing (which imports unittest): 0.06-0.1 s per process for modules
tubewright never uses. Their stand-ins must also be attributes of numpy (its module ``__getattr__`` would
otherwise import them), so they are set right after numpy itself is executed (``after_import``)."""

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


def defer_modules(names) -> dict:
    """Stand a DeferredModule in for each of these modules; skipped for a module already imported (or
    standing in), or one not installed. Returns {name: stand-in} of those stood in now."""
    placed = {}
    for name in names:
        if name in sys.modules:
            continue
        spec = find_spec_unexecuted(name)
        if spec is not None and spec.loader is not None:
            sys.modules[name] = placed[name] = DeferredModule(spec)
    return placed


def defer_submodules(package, names) -> None:
    """defer_modules for submodules ``names`` of the imported module ``package``, each stand-in also set as its
    attribute (for a package whose module ``__getattr__`` imports its submodules); skipped for an attribute
    the package has."""
    prefix = f"{package.__name__}."
    placed = defer_modules(prefix + name for name in names if name not in package.__dict__)
    for full, stand_in in placed.items():
        setattr(package, full[len(prefix):], stand_in)


def after_import(name: str, then) -> None:
    """Call ``then(module)`` once the top-level module ``name`` is imported: at once if it is, else right after
    its first execution (a finder first in ``sys.meta_path`` that wraps the module's loader, then leaves)."""
    module = sys.modules.get(name)
    if module is not None:
        then(module)
    else:
        sys.meta_path.insert(0, _AfterImport(name, then))


class _AfterImport:
    """A meta path finder (duck-typed: importlib.abc costs 12 ms of each start, importing importlib.resources)."""

    def __init__(self, name, then):
        self.name, self.then = name, then

    def find_spec(self, fullname, path=None, target=None):
        if fullname != self.name or self not in sys.meta_path:
            return None
        later = sys.meta_path[sys.meta_path.index(self) + 1:]  # the finders that would have found it
        sys.meta_path.remove(self)
        for finder in later:
            spec = finder.find_spec(fullname, path, target) if hasattr(finder, "find_spec") else None
            if spec is not None:
                if spec.loader is not None and hasattr(spec.loader, "exec_module"):
                    spec.loader = _LoaderThen(spec.loader, self.then)
                return spec
        return None


class _LoaderThen:
    """A module's own loader, followed by ``then(module)``; the module keeps its own loader afterwards."""

    def __init__(self, loader, then):
        self._loader, self._then = loader, then

    def create_module(self, spec):
        return self._loader.create_module(spec)

    def exec_module(self, module):
        module.__loader__ = module.__spec__.loader = self._loader
        self._loader.exec_module(module)
        self._then(module)
