"""The shape of the package: one import name, no import cycles, no private names across modules, no side
effects at import. Facts about this project itself (no outside source needed)."""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from builders import ROOT

ROOMS = {"tubewright": ROOT / "tubewright", "tubewright.models": ROOT / "models",
         "tubewright.optimizer": ROOT / "optimizer"}


def _modules() -> dict:
    """Module name -> path for every module of the package, following the package-dir mapping."""
    out = {}
    for package, folder in ROOMS.items():
        for path in folder.rglob("*.py"):
            rel = path.relative_to(folder).with_suffix("")
            parts = [p for p in rel.parts if p != "__init__"]
            out[".".join([package, *parts])] = path
    return out


def _top_level_imports(name: str, path: Path):
    """(imported module, imported names, is at module level) for every import of a module."""
    tree = ast.parse(path.read_text())
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    top = set(map(id, tree.body))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            yield module, [a.name for a in node.names], id(node) in top
        elif isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, [], id(node) in top


@pytest.mark.parametrize("deferred", [False, True], ids=["module level", "with deferred imports"])
def test_imports_have_no_cycles(deferred):
    """Module-level imports form no cycle; neither do they together with the imports deferred into
    functions, so no deferred import exists to dodge a cycle (they only defer heavy libraries)."""
    modules = _modules()
    graph = {name: set() for name in modules}
    for name, path in modules.items():
        for module, names, at_top in _top_level_imports(name, path):
            if not (at_top or deferred):
                continue
            submodules = [f"{module}.{n}" for n in names if f"{module}.{n}" in modules]
            for target in submodules or [module]:  # "from . import x" needs x, not the package's __init__
                if target in modules and target != name:
                    graph[name].add(target)
    state = {}

    def visit(node, trail):
        state[node] = "open"
        for nxt in graph[node]:
            if state.get(nxt) == "open":
                pytest.fail("import cycle: " + " -> ".join(trail + [node, nxt]))
            if nxt not in state:
                visit(nxt, trail + [node])
        state[node] = "done"

    for node in graph:
        if node not in state:
            visit(node, [])


def test_no_module_imports_a_private_name_of_another():
    modules = _modules()
    for name, path in modules.items():
        for module, names, _ in _top_level_imports(name, path):
            if module.startswith("tubewright"):
                private = [n for n in names if n.startswith("_") and n != "__version__"]
                assert not private, f"{name} imports {private} from {module}"


def test_optimizer_rooms_hold_their_jobs_and_models_never_import_optimizer():
    rooms = {p.name for p in (ROOT / "optimizer").iterdir() if p.is_dir() and not p.name.startswith("_")}
    assert rooms >= {"nlp", "design", "screening", "study", "output"}
    flat = {p.name for p in (ROOT / "optimizer").glob("*.py")}
    assert flat == {"__init__.py", "cli.py", "command.py", "verbs.py", "processes.py"}
    for name, path in _modules().items():
        if name.startswith("tubewright.models"):
            for module, _, _ in _top_level_imports(name, path):
                assert not module.startswith("tubewright.optimizer"), f"{name} imports {module}"
        if name.startswith("tubewright.optimizer.nlp"):  # the bridge knows nothing of reactors
            for module, _, _ in _top_level_imports(name, path):
                assert not module.startswith(("tubewright.models", "tubewright.optimizer.design")), name


def _run(code: str) -> str:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                          cwd=ROOT / "tests").stdout.strip()


def test_import_is_light_and_changes_nothing_global():
    out = _run("import sys, tubewright as tw; tw.load_case; tw.CaseError; "
               "print(sorted(m for m in ('pyomo', 'pandas', 'matplotlib', 'SALib', 'cyipopt', 'scipy') "
               "if m in sys.modules))")
    assert out == "[]"
    # the command line's start: the version is read from the distribution's metadata when asked only (25-40 ms);
    # the deferred imports' finder needs no importlib.abc (which imports importlib.resources: 12 ms)
    out = _run("import sys, tubewright.optimizer.cli, tubewright.optimizer.study.store; "
               "print([m for m in ('importlib.metadata', 'importlib.abc', 'importlib.resources') if m in sys.modules])")
    assert out == "[]"
    # importing the bridge and the plotting modules patches nothing: Pyomo's rules and matplotlib's backend stay
    out = _run("import matplotlib; before = matplotlib.get_backend(); "
               "import pyomo.core.expr as E, pyomo.core.expr.calculus.diff_with_pyomo as d; "
               "import tubewright.optimizer.nlp.bridge, tubewright.optimizer.output.plots, "
               "tubewright.optimizer.study.report, tubewright.optimizer.screening.report; "
               "print(E.Expr_ifExpression in d._diff_map, matplotlib.get_backend() == before)")
    assert out == "False True"


def test_pyomo_import_leaves_scipy_stats_unexecuted_until_used():
    # Pyomo imports scipy.stats whenever scipy is imported (0.5-0.8 s); tubewright defers it to first use
    out = _run("import sys, tubewright.optimizer.design.optimise, tubewright.models.simulator; "
               "print('scipy.stats._stats_py' in sys.modules, 'scipy.spatial._qhull' in sys.modules); "
               "import scipy.stats as st; from scipy.stats import qmc; from scipy import stats; "
               "print(round(float(st.norm.ppf(0.975)), 4), stats is sys.modules['scipy.stats'], "
               "qmc.Sobol(2, seed=1).random(2).shape)")
    assert out.split("\n") == ["False False", "1.96 True (2, 2)"]
    # a submodule imported first executes its package first, as without the stand-in (scipy.spatial's
    # __init__ imports scipy.spatial.distance itself: a circular import otherwise; SALib's Morris sampler
    # imports that submodule)
    out = _run("import sys, tubewright.optimizer.design.optimise; from SALib.sample import morris; "
               "import scipy.spatial.distance as d, scipy.stats._qmc as q; "
               "print(d.euclidean([0, 0], [3, 4]), type(sys.modules['scipy.spatial']).__name__, "
               "type(sys.modules['scipy.stats']).__name__)")
    assert out == "5.0 module module"
    out = _run("import tubewright, scipy.stats as st; print('norm' in dir(st))")
    assert out == "True"


@pytest.mark.parametrize("numpy_first", [False, True], ids=["tubewright first", "numpy first"])
def test_numpy_submodules_that_scipy_and_pyomo_import_stay_unexecuted_until_used(numpy_first):
    # scipy's "from numpy import *" and Pyomo's numpy.testing execute f2py, ma, polynomial and testing
    extras = ("numpy.f2py", "numpy.ma", "numpy.polynomial", "numpy.testing")
    out = _run(("import numpy; " if numpy_first else "") +
               "import sys, tubewright, tubewright.optimizer.design.optimise, tubewright.models.simulator, "
               f"tubewright.models.radial_grid; print([type(sys.modules[m]).__name__ for m in {extras!r}]); "
               "import numpy as np; np.testing.assert_allclose(1.0, 1.0); from numpy.polynomial import Polynomial; "
               "print(float(np.ma.masked_array([1, 2], [0, 1]).sum()), Polynomial([1, 2])(2), "
               f"[type(sys.modules[m]).__name__ for m in {extras[1:]!r}], np.testing is sys.modules['numpy.testing'], "
               "type(np.__loader__).__name__)")
    assert out.split("\n") == [str(["DeferredModule"] * 4), f"1.0 5.0 {['module'] * 3} True SourceFileLoader"]


def test_a_figure_after_pyomo_leaves_pyplot_unexecuted_until_used():
    # Pyomo imports matplotlib.pyplot and pylab whenever matplotlib is imported; the figures need neither
    out = _run("import sys, tubewright.optimizer.design.optimise; "
               "from tubewright.optimizer.output.canvas import new_figure; new_figure((1, 1)).savefig('/dev/null', "
               "format='png'); print(type(sys.modules['matplotlib.pyplot']).__name__, "
               "type(sys.modules['matplotlib.pylab']).__name__); "
               "import matplotlib.pyplot as plt; plt.switch_backend('agg'); fig = plt.figure(); "
               "print(len(plt.get_fignums()), type(sys.modules['matplotlib.pyplot']).__name__)")
    assert out.split("\n") == ["DeferredModule DeferredModule", "1 module"]


def test_optimiser_imports_pyomo_core_and_dae_only():
    # pyomo.environ loads every Pyomo package (solvers, GDP, networks...): 0.1 s of each start for nothing
    out = _run("import sys, tubewright.optimizer.design.optimise, tubewright.optimizer.fitting.estimate, "
               "tubewright.optimizer.screening.reoptimise; import pyomo.core as pyo; "
               "print('pyomo.environ' in sys.modules, pyo.TransformationFactory('dae.collocation') is not None)")
    assert out == "False True"


def test_version_is_read_from_the_distribution():
    import importlib.metadata

    import tubewright

    assert tubewright.__version__ == importlib.metadata.version("tubewright")


@pytest.mark.slow
def test_built_wheel_adds_only_the_tubewright_import_name(tmp_path):
    # built from a copy of the sources: setuptools would reuse an earlier build/ folder of the tree, which keeps
    # modules since renamed or removed
    source = tmp_path / "source"
    shutil.copytree(ROOT, source, ignore=shutil.ignore_patterns(".*", "build", "dist", "*.egg-info", "__pycache__",
                                                                 "demo-output", "tests"))
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "-w", str(tmp_path), str(source)],
                   check=True, capture_output=True)
    (wheel,) = tmp_path.glob("tubewright-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    tops = {n.split("/")[0] for n in names}
    assert {t for t in tops if not t.endswith(".dist-info")} == {"tubewright"}
    modules = {n for n in names if n.endswith(".py")}
    assert "tubewright/models/simulator.py" in modules and "tubewright/optimizer/nlp/bridge.py" in modules
    assert len(modules) == len(_modules())  # every module of the tree is shipped, under tubewright/
    entry = next(n for n in names if n.endswith("entry_points.txt"))
    assert "tubewright = tubewright.optimizer.command:console" in zipfile.ZipFile(wheel).read(entry).decode()
