"""tubewright: screening design of cooled tubular reactors.

The public API, imported lazily so that ``import tubewright`` stays fast::

    import tubewright as tw
    case = tw.load_case("case.toml")          # -> tw.Case (SI), or raises tw.CaseError
    result = tw.simulate(case)                # -> tw.SimulationResult (status, reason, summary, profiles)
    design = tw.optimize(case)                # -> tw.OptimizationResult
    ranking = tw.screen(case, "morris", 20)   # -> tw.ScreeningResult
    kinetics = tw.fit("lab.toml", "runs.csv") # -> tw.FitOutcome (estimates, statistics)
    tw.run_study("study.toml", "results/")    # -> summary dict of the run

The folders ``models/`` (physics) and ``optimizer/`` (design, screening, studies, command line) install as
``tubewright.models`` and ``tubewright.optimizer``. Screening estimates only: see the README's cautions.
"""

from __future__ import annotations

import importlib.util
import sys
import types
from importlib import import_module
from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("tubewright")
except PackageNotFoundError:  # pragma: no cover - running from a source tree that was never installed
    __version__ = "0+unknown"


class _DeferredModule(types.ModuleType):
    """Stands in sys.modules for a module not yet executed. It carries the module's spec, so that the
    statement ``import a.b`` finds it and executes nothing, and executes the real module on the first other
    attribute asked of it, then forwards every attribute to it. Its ``__path__`` is such an attribute: the
    import of a submodule (``import a.b.c``) executes the real package first, as without the stand-in (its
    ``__init__`` may import that submodule itself)."""

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


def _defer_scipy_submodules(names=("scipy.stats", "scipy.spatial")) -> None:
    """Stand deferred modules in for these scipy submodules. Pyomo imports them whenever scipy is imported,
    "to assume they are present" (pyomo.common.dependencies._finalize_scipy): 0.5-0.8 s per process, as
    scipy.stats builds its distributions' docstrings at import. tubewright uses scipy.stats only in
    screening, fitting and robust verification, and scipy.spatial not at all. (importlib.util.LazyLoader does
    not serve: Python 3.11's import statement reads ``__spec__`` of a module found in sys.modules, which
    executes a lazy module.) Skipped for a module already imported."""
    for name in names:
        if name in sys.modules:
            continue
        spec = importlib.util.find_spec(name)
        if spec is not None and spec.loader is not None:
            sys.modules[name] = _DeferredModule(spec)


_defer_scipy_submodules()

# public name -> (module, attribute)
_PUBLIC = {
    "load_case": ("tubewright.models.casefile", "load_case"),
    "Case": ("tubewright.models.case", "Case"),
    "CaseError": ("tubewright.models.errors", "CaseError"),
    "simulate": ("tubewright.optimizer.verbs", "simulate"),
    "SimulationResult": ("tubewright.models.results", "SimulationResult"),
    "optimize": ("tubewright.optimizer.verbs", "optimize"),
    "OptimizationResult": ("tubewright.optimizer.design.outcome", "OptimizationResult"),
    "screen": ("tubewright.optimizer.verbs", "screen"),
    "ScreeningResult": ("tubewright.optimizer.screening.analysis", "ScreeningResult"),
    "pareto": ("tubewright.optimizer.verbs", "pareto"),
    "fit": ("tubewright.optimizer.verbs", "fit"),
    "FitOutcome": ("tubewright.optimizer.fitting.estimate", "FitOutcome"),
    "run_study": ("tubewright.optimizer.study.runner", "run_study"),
    "Status": ("tubewright.models.outcomes", "Status"),
}

__all__ = ["__version__", *_PUBLIC]


def __getattr__(name: str):
    try:
        module, attribute = _PUBLIC[name]
    except KeyError:
        raise AttributeError(f"module 'tubewright' has no attribute {name!r}") from None
    value = getattr(import_module(module), attribute)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
