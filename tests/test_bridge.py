"""The Pyomo-to-cyipopt bridge: a textbook NLP optimum, derivatives against finite differences, re-solves."""

import numpy as np
import pytest

pyo = pytest.importorskip("pyomo.environ")
pytest.importorskip("cyipopt")

from tubewright.optimizer.nlp.bridge import CompiledNLP  # noqa: E402


def hs71():
    m = pyo.ConcreteModel()
    m.x = pyo.Var([1, 2, 3, 4], bounds=(1, 5), initialize={1: 1, 2: 5, 3: 5, 4: 1})
    m.p = pyo.Param(mutable=True, initialize=25.0)
    m.obj = pyo.Objective(expr=m.x[1] * m.x[4] * (m.x[1] + m.x[2] + m.x[3]) + m.x[3])
    m.prod = pyo.Constraint(expr=m.x[1] * m.x[2] * m.x[3] * m.x[4] >= m.p)
    m.sphere = pyo.Constraint(expr=sum(m.x[i] ** 2 for i in m.x) == 40)
    return m


def test_hs71_published_optimum():
    # Hock and Schittkowski (1981), problem 71: f* = 17.0140173 at x* = (1, 4.7429994, 3.8211503, 1.3794082).
    m = hs71()
    out = CompiledNLP(m).solve()
    assert out.success and out.status_name == "optimal"
    assert out.objective == pytest.approx(17.0140173, rel=1e-7)
    assert [pyo.value(m.x[i]) for i in m.x] == pytest.approx([1.0, 4.7429994, 3.8211503, 1.3794082], abs=1e-6)
    assert out.iterations > 0 and out.times["compile_s"] > 0


def test_parameter_change_resolves_without_recompiling():
    m = hs71()
    nlp = CompiledNLP(m)
    first = nlp.solve()
    compiled_at = nlp.times["compile_s"]
    m.p = 26.0
    second = nlp.solve(warm_start=True)
    assert second.success and second.objective > first.objective
    assert nlp.times["compile_s"] == compiled_at
    # multiplier of the product constraint = d f*/d p (finite difference of the optimum, a few percent)
    lam = nlp.multiplier(m.prod)
    m.p = 26.0 + 1e-3
    third = nlp.solve(warm_start=True)
    assert abs(lam) == pytest.approx((third.objective - second.objective) / 1e-3, rel=2e-2)


def _fd_check(nlp, x):
    nlp.refresh()
    h = 1e-6
    jac = np.zeros((nlp.m, nlp.n))
    jac[nlp.jac_rows, nlp.jac_cols] = nlp._jac(x)
    grad = nlp._grad(x)
    for k in range(nlp.n):
        e = np.zeros(nlp.n)
        e[k] = h
        assert grad[k] == pytest.approx((nlp._obj(x + e) - nlp._obj(x - e)) / (2 * h), rel=1e-6, abs=1e-6)
        assert jac[:, k] == pytest.approx((nlp._cons(x + e) - nlp._cons(x - e)) / (2 * h), rel=1e-6, abs=1e-6)
    lam = np.linspace(0.5, 1.5, nlp.m)
    sigma = 0.7
    hess = np.zeros((nlp.n, nlp.n))
    np.add.at(hess, (nlp.hess_rows, nlp.hess_cols), nlp._hess(x, lam, sigma))
    hess = hess + np.tril(hess, -1).T

    def lag_grad(y):
        j = np.zeros((nlp.m, nlp.n))
        j[nlp.jac_rows, nlp.jac_cols] = nlp._jac(y)
        return sigma * nlp._grad(y) + lam @ j

    for k in range(nlp.n):
        e = np.zeros(nlp.n)
        e[k] = h
        assert hess[:, k] == pytest.approx((lag_grad(x + e) - lag_grad(x - e)) / (2 * h), rel=1e-5, abs=1e-5)


def test_derivatives_against_finite_differences_hs71():
    nlp = CompiledNLP(hs71())
    _fd_check(nlp, np.array([1.3, 4.1, 3.7, 1.9]))


def test_derivatives_with_functions_and_piecewise_terms():
    # exp, log, sqrt, division, powers, an input, and an Expr_if (piecewise) term, with repeated forms.
    m = pyo.ConcreteModel()
    m.I = pyo.RangeSet(0, 5)
    m.x = pyo.Var(m.I, initialize=lambda m, i: 1.0 + 0.3 * i, bounds=(0.1, 10))
    m.q = pyo.Param(mutable=True, initialize=1.7)
    m.c = pyo.Constraint(m.I, rule=lambda m, i: pyo.exp(m.x[i] / m.q) * pyo.sqrt(m.x[(i + 1) % 6])
                         - pyo.log(m.x[i]) ** 2 + pyo.Expr_if(IF=m.x[i] <= 1.5, THEN=m.x[i] ** 3, ELSE=2 * m.x[i]) == 3)
    m.o = pyo.Objective(expr=sum((m.x[i] - i) ** 2 / (1 + m.x[i]) for i in m.I))
    nlp = CompiledNLP(m)
    assert nlp.times["forms"] == 1  # six constraints, one form
    _fd_check(nlp, np.array([1.2, 1.6, 0.9, 2.2, 1.4, 3.0]))
