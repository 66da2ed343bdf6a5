"""Row families (nlp.families): a template block's rows repeated over the model's variables compile to the same
problem as the rows built one by one, and keep their instances' own rows."""

import numpy as np
import pytest

pyo = pytest.importorskip("pyomo.environ")
pytest.importorskip("cyipopt")

from tubewright.optimizer.nlp.bridge import CompiledNLP  # noqa: E402
from tubewright.optimizer.nlp.families import FamilyRow, RowFamily, declare_family, origin  # noqa: E402

N, H, Y0, TARGET = 12, 0.1, 2.0, 0.5


def _step_rows(b, y_now, y_next, z, k):
    """One implicit Euler step of dy/dt = -k y (``step``) and a free side variable z = y^2 (``square``)."""
    b.step = pyo.Constraint(expr=y_next - y_now == -H * k * y_next)
    b.square = pyo.Constraint(expr=z == y_next ** 2)


def chain(family: bool):
    """The rate constant k that brings y from Y0 to TARGET in N implicit Euler steps of H; with ``family``
    the step rows are built once, in a template block, and repeated by the bridge."""
    m = pyo.ConcreteModel()
    m.k = pyo.Var(bounds=(0.0, 100.0), initialize=1.0)  # shared: the template's rows hold it directly
    m.y = pyo.Var(range(N + 1), initialize=1.0)
    m.z = pyo.Var(range(1, N + 1), initialize=1.0)
    m.start = pyo.Constraint(expr=m.y[0] == Y0)
    if family:
        m.t = pyo.Block()
        m.t.y0, m.t.y1, m.t.z = pyo.Var(), pyo.Var(), pyo.Var()
        _step_rows(m.t, m.t.y0, m.t.y1, m.t.z, m.k)
        declare_family(m, RowFamily(m.t, [m.t.y0, m.t.y1, m.t.z],
                                    [[m.y[i], m.y[i + 1], m.z[i + 1]] for i in range(N)], label="step"))
    else:
        m.steps = pyo.Block(range(N))
        for i in range(N):
            _step_rows(m.steps[i], m.y[i], m.y[i + 1], m.z[i + 1], m.k)
    m.goal = pyo.Objective(expr=(m.y[N] - TARGET) ** 2 + 1e-3 * m.k ** 2)
    return m


def test_a_family_solves_the_same_problem_as_rows_built_one_by_one():
    built, repeated = chain(False), chain(True)
    a, b = CompiledNLP(built, compact=False), CompiledNLP(repeated, compact=False)
    assert (a.n, a.m) == (b.n, b.m) == (2 * N + 2, 2 * N + 1)  # the template's own variables are no columns
    assert b.times["forms"] == a.times["forms"]
    out_a, out_b = a.solve(), b.solve()
    assert out_a.success and out_b.success
    assert out_b.objective == pytest.approx(out_a.objective, rel=1e-12)
    ya = [pyo.value(built.y[i]) for i in range(N + 1)]
    assert [pyo.value(repeated.y[i]) for i in range(N + 1)] == pytest.approx(ya, rel=1e-10)
    # analytic: implicit Euler gives y_N = Y0 / (1 + k H)^N exactly (a geometric sequence)
    k = pyo.value(repeated.k)
    assert pyo.value(repeated.y[N]) == pytest.approx(Y0 / (1.0 + k * H) ** N, rel=1e-9)
    # every row's multiplier, matched by what it is (step i's rows): the instance rows are the built ones
    by_name = dict(zip((c.name for c in a.constraints), out_a.multipliers))
    for c, lam in zip(b.constraints, out_b.multipliers):
        i = c.instance if isinstance(c, FamilyRow) else 0
        name = c.name if origin(c).parent_block() is repeated else f"steps[{i}].{origin(c).local_name}"
        assert lam == pytest.approx(by_name[name], rel=1e-7, abs=1e-10)


def test_instance_rows_are_named_by_their_template_and_instance():
    nlp = CompiledNLP(chain(True))
    added = [c for c in nlp.constraints if isinstance(c, FamilyRow)]
    assert len(added) == 2 * (N - 1)
    assert added[0].name == "t.step (step 2)" and added[-1].name == "t.square (step 12)"
    assert all(origin(c).parent_block().name == "t" for c in added)
    assert np.all(nlp.equality_rows())


def test_a_deactivated_template_row_is_dropped_from_every_instance():
    m = chain(True)
    m.t.square.deactivate()
    nlp = CompiledNLP(m, compact=False)
    assert nlp.m == N + 1 and not any("square" in c.name for c in nlp.constraints)


def test_a_fixed_instance_variable_is_refused_with_its_name():
    m = chain(True)
    m.y[5].fix(1.0)
    with pytest.raises(ValueError, match=r"y\[5\] is fixed"):
        CompiledNLP(m)


def test_an_instance_that_lists_too_few_variables_is_refused():
    m = chain(True)
    with pytest.raises(ValueError, match="instance 1 lists 2 variables for the template's 3"):
        RowFamily(m.t, [m.t.y0, m.t.y1, m.t.z], [[m.y[0], m.y[1], m.z[1]], [m.y[1], m.y[2]]])
