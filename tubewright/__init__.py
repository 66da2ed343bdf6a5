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

from importlib import import_module

from tubewright.deferred import after_import, defer_modules, defer_submodules

# Pyomo imports scipy.stats and scipy.spatial whenever scipy is imported; scipy and Pyomo execute numpy
# submodules that tubewright does not use (see tubewright.deferred)
defer_modules(("scipy.stats", "scipy.spatial"))
after_import("numpy", lambda numpy: defer_submodules(numpy, ("f2py", "ma", "polynomial", "testing")))

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


def _version() -> str:
    """The installed distribution's version (read on first use: importlib.metadata costs 25-40 ms)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("tubewright")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree that was never installed
        return "0+unknown"


def __getattr__(name: str):
    if name == "__version__":
        globals()[name] = value = _version()
        return value
    try:
        module, attribute = _PUBLIC[name]
    except KeyError:
        raise AttributeError(f"module 'tubewright' has no attribute {name!r}") from None
    value = getattr(import_module(module), attribute)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
