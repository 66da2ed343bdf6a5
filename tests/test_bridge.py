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


def _derivatives_match(n, m, f, grad, cons, jac, jac_structure, hess, hess_structure, x, lam, sigma,
                       abs_tol=(1e-6, 1e-6, 1e-5)):
    """Gradient, Jacobian and Lagrangian Hessian (lower triangle) against central differences at x;
    ``abs_tol``: absolute tolerances of the three (relative: 1e-6, 1e-6, 1e-5)."""
    h = 1e-6
    jac_x = np.zeros((m, n))
    jac_x[jac_structure] = jac(x)
    hess_x = np.zeros((n, n))
    np.add.at(hess_x, hess_structure, hess(x, lam, sigma))
    hess_x = hess_x + np.tril(hess_x, -1).T

    def lag_grad(z):
        j = np.zeros((m, n))
        j[jac_structure] = jac(z)
        return sigma * grad(z) + lam @ j

    for k in range(n):
        e = np.zeros(n)
        e[k] = h
        assert grad(x)[k] == pytest.approx((f(x + e) - f(x - e)) / (2 * h), rel=1e-6, abs=abs_tol[0])
        assert jac_x[:, k] == pytest.approx((cons(x + e) - cons(x - e)) / (2 * h), rel=1e-6, abs=abs_tol[1])
        assert hess_x[:, k] == pytest.approx((lag_grad(x + e) - lag_grad(x - e)) / (2 * h), rel=1e-5,
                                             abs=abs_tol[2])


def _fd_check(nlp, x):
    nlp.refresh()
    _derivatives_match(nlp.n, nlp.m, nlp._obj, nlp._grad, nlp._cons, nlp._jac, (nlp.jac_rows, nlp.jac_cols),
                       nlp._hess, (nlp.hess_rows, nlp.hess_cols), x, np.linspace(0.5, 1.5, nlp.m), 0.7)


def test_derivatives_against_finite_differences_hs71():
    nlp = CompiledNLP(hs71())
    _fd_check(nlp, np.array([1.3, 4.1, 3.7, 1.9]))


def piecewise_model():
    """exp, log, sqrt, division, powers, an input, and an Expr_if (piecewise) term, with repeated forms."""
    m = pyo.ConcreteModel()
    m.I = pyo.RangeSet(0, 5)
    m.x = pyo.Var(m.I, initialize=lambda m, i: 1.0 + 0.3 * i, bounds=(0.1, 10))
    m.q = pyo.Param(mutable=True, initialize=1.7)
    m.c = pyo.Constraint(m.I, rule=lambda m, i: pyo.exp(m.x[i] / m.q) * pyo.sqrt(m.x[(i + 1) % 6])
                         - pyo.log(m.x[i]) ** 2 + pyo.Expr_if(IF=m.x[i] <= 1.5, THEN=m.x[i] ** 3, ELSE=2 * m.x[i]) == 3)
    m.o = pyo.Objective(expr=sum((m.x[i] - i) ** 2 / (1 + m.x[i]) for i in m.I))
    return m


def test_derivatives_with_functions_and_piecewise_terms():
    nlp = CompiledNLP(piecewise_model())
    assert nlp.times["forms"] == 1  # six constraints, one form
    _fd_check(nlp, np.array([1.2, 1.6, 0.9, 2.2, 1.4, 3.0]))


def chained_model():
    """x, y bounded; d and e free, defined by linear rows (e through d: two substitution levels); the row
    ``fix`` (linear, with an input) and a nonlinear row remain for IPOPT."""
    m = pyo.ConcreteModel()
    m.x = pyo.Var(bounds=(-5, 5), initialize=0.5)
    m.y = pyo.Var(bounds=(-5, 5), initialize=0.5)
    m.d = pyo.Var(initialize=0.0)
    m.e = pyo.Var(initialize=0.0)
    m.a = pyo.Param(mutable=True, initialize=2.0)
    m.p = pyo.Param(mutable=True, initialize=4.0)
    m.define_d = pyo.Constraint(expr=m.d - m.a * m.x - 3 * m.y == 0.5)
    m.define_e = pyo.Constraint(expr=2 * m.e - m.d - m.x == 0)
    m.fix = pyo.Constraint(expr=m.d == m.p)
    m.curve = pyo.Constraint(expr=m.x * m.y >= 0.1)
    m.obj = pyo.Objective(expr=m.x**2 + m.y**2 + (m.e - 1) ** 2)
    return m


def test_compact_problem_eliminates_the_defined_variables():
    nlp = CompiledNLP(chained_model())
    red = nlp.compact
    assert sorted(nlp.variables[i].name for i in red.eliminated) == ["d", "e"]
    assert sorted(nlp.constraints[i].name for i in red.rows) == ["define_d", "define_e"]
    assert red.levels == 2 and (red.n, red.m) == (2, 2)


def test_compact_and_full_problems_agree_on_point_and_every_multiplier():
    results = []
    for compact in (True, False):
        m = chained_model()
        nlp = CompiledNLP(m, compact=compact)
        out = nlp.solve(options={"tol": 1e-10})
        assert out.success
        results.append((out.objective, [pyo.value(v) for v in (m.x, m.y, m.d, m.e)],
                        [nlp.multiplier(c) for c in (m.define_d, m.define_e, m.fix, m.curve)]))
    (f1, x1, l1), (f2, x2, l2) = results
    assert f1 == pytest.approx(f2, rel=1e-9)
    assert x1 == pytest.approx(x2, abs=1e-7)
    assert l1 == pytest.approx(l2, rel=1e-6, abs=1e-9)


def test_a_solve_without_multipliers_gives_the_same_point_and_says_so():
    m = chained_model()
    nlp = CompiledNLP(m)
    full = nlp.solve(options={"tol": 1e-10})
    x_full = [pyo.value(v) for v in (m.x, m.y, m.d, m.e)]
    lean = nlp.solve(options={"tol": 1e-10}, multipliers=False)
    assert lean.success and [pyo.value(v) for v in (m.x, m.y, m.d, m.e)] == pytest.approx(x_full, abs=1e-9)
    removed = nlp.compact.removed_rows
    assert np.all(np.isnan(lean.multipliers[removed])) and np.all(np.isfinite(full.multipliers))
    with pytest.raises(RuntimeError, match="multipliers=False"):
        nlp.multiplier(m.define_d)
    again = nlp.solve(options={"tol": 1e-10}, warm_start=True)  # nothing to start warm from: a cold start
    assert again.success and nlp.multiplier(m.define_d) == pytest.approx(full.multipliers[nlp.constraints.index(
        m.define_d)], rel=1e-6)


def test_compact_multiplier_is_the_analytic_sensitivity():
    # min x^2 + y^2 + (e - 1)^2 with d = a x + 3 y + 0.5 = p and e = (d + x)/2: a smooth problem in (x, y);
    # the multiplier of ``fix`` is -df*/dp (IPOPT: L = f + lambda g, g = d - p), checked by a central difference
    m = chained_model()
    nlp = CompiledNLP(m)
    nlp.solve(options={"tol": 1e-12})
    lam = nlp.multiplier(m.fix)
    values = []
    for p in (4.0 - 1e-4, 4.0 + 1e-4):
        m.p = p
        values.append(nlp.solve(options={"tol": 1e-12}).objective)
    assert -lam == pytest.approx((values[1] - values[0]) / 2e-4, rel=1e-5)


def test_compact_problem_reads_changed_coefficients():
    # a (the coefficient of x in define_d) is an input: changing it must change the elimination, not the form
    m = chained_model()
    nlp = CompiledNLP(m)
    m.a = -1.0
    out = nlp.solve(options={"tol": 1e-10})
    fresh = chained_model()
    fresh.a = -1.0
    ref = CompiledNLP(fresh, compact=False).solve(options={"tol": 1e-10})
    assert out.objective == pytest.approx(ref.objective, rel=1e-9)
    assert pyo.value(m.d) == pytest.approx(-1.0 * pyo.value(m.x) + 3 * pyo.value(m.y) + 0.5, abs=1e-9)


def test_bounds_on_an_eliminated_variable_fall_back_to_the_full_problem():
    m = chained_model()
    nlp = CompiledNLP(m)
    nlp.solve(options={"tol": 1e-10})
    bound = pyo.value(m.e) + 0.05  # binding
    m.e.setlb(bound)
    out = nlp.solve(options={"tol": 1e-10})
    assert nlp._reduction(nlp.current_point()) is None
    full = chained_model()
    full.e.setlb(bound)
    ref = CompiledNLP(full, compact=False).solve(options={"tol": 1e-10})
    assert out.success and pyo.value(m.e) == pytest.approx(bound, abs=1e-6)  # IPOPT relaxes bounds by 1e-8 relative
    assert out.objective == pytest.approx(ref.objective, rel=1e-9)


def test_compact_derivatives_against_finite_differences():
    nlp = CompiledNLP(chained_model())
    nlp.refresh()
    red = nlp._reduction(nlp.current_point())
    _derivatives_match(red.n, red.m, red.objective, red.gradient, red.constraints, red.jacobian,
                       (red.jac_rows, red.jac_cols), red.hessian, (red.hess_rows, red.hess_cols),
                       np.array([0.7, -1.3]), np.array([0.8, 1.3]), 0.6, abs_tol=(1e-12, 1e-8, 1e-6))


def _blocks(constants=(2.0, 2.0, 2.0)):
    """Three blocks built by one function, differing in a mutable Param (and in the constant ``c`` of their
    first constraint when asked), sharing the variable z: min sum_i (x_i - p_i)^2 + z^2 with c x_i y_i = 1."""
    m = pyo.ConcreteModel()
    m.z = pyo.Var(initialize=0.5)
    m.b = pyo.Block(range(3))
    for i, c in enumerate(constants):
        b = m.b[i]
        b.p = pyo.Param(mutable=True, initialize=1.0 + i)
        b.x = pyo.Var(initialize=1.0, bounds=(0.1, 10))
        b.y = pyo.Var(initialize=1.0, bounds=(0.1, 10))
        b.first = pyo.Constraint(expr=c * b.x * b.y == 1.0)
        b.second = pyo.Constraint(expr=b.y + m.z + 0.1 * m.z**2 >= 0.2 * b.p)  # (z, z): one entry for all
    m.obj = pyo.Objective(expr=sum((m.b[i].x - m.b[i].p) ** 2 for i in range(3)) + m.z**2)
    return m


def test_replicated_blocks_compile_to_the_same_problem():
    # One block printed for three: the same variables, Jacobian and Hessian structures, derivatives (checked
    # by finite differences) and optimum as printing every block.
    full, rep = _blocks(), _blocks()
    a = CompiledNLP(full, compact=False)
    b = CompiledNLP(rep, compact=False, replicas=[[rep.b[i] for i in range(3)]])
    assert a.times["replicated_blocks"] == 0 and b.times["replicated_blocks"] == 2
    assert [v.name for v in a.variables] == [v.name for v in b.variables]
    assert np.array_equal(a.jac_rows, b.jac_rows) and np.array_equal(a.jac_cols, b.jac_cols)
    assert np.array_equal(a.hess_rows, b.hess_rows) and np.array_equal(a.hess_cols, b.hess_cols)
    _fd_check(b, np.linspace(0.3, 1.7, b.n))
    out_a, out_b = a.solve(), b.solve()
    assert out_b.success and out_b.objective == pytest.approx(out_a.objective, rel=1e-12)
    assert out_b.x == pytest.approx(out_a.x, rel=1e-10)


def test_a_replica_whose_numbers_differ_is_printed():
    # The third block's first constraint carries another constant: the check prints it in full.
    m = _blocks((2.0, 2.0, 3.0))
    nlp = CompiledNLP(m, compact=False, replicas=[[m.b[i] for i in range(3)]])
    assert nlp.times["replicated_blocks"] == 1
    out = nlp.solve()
    assert out.success and pyo.value(3.0 * m.b[2].x * m.b[2].y) == pytest.approx(1.0, rel=1e-8)


def _copied_blocks(built: int, ps=(1.0, 2.0, 3.0), flows=(1.0, 1.5, 0.8)):
    """min sum_i (x_i - p_i)^2 / w_i + z^2 + z w_i with 2 x_i y_i = q_i (q_i an input of the row's bound) and
    y_i + z + 0.1 z^2 >= 0.2 p_i: the first ``built`` blocks in Pyomo, whose last is the template; the objective
    holds each built block's term as a named Expression."""
    m = pyo.ConcreteModel()
    m.z = pyo.Var(initialize=0.5)
    m.b = pyo.Block(range(built))
    for i in range(built):
        b = m.b[i]
        b.p = pyo.Param(mutable=True, initialize=ps[i])
        b.q = pyo.Param(mutable=True, initialize=flows[i])
        b.w = pyo.Var(initialize=1.0 + i)
        b.w.fix()  # a fixed variable: an input of the block
        b.x = pyo.Var(initialize=1.0, bounds=(0.1, 10))
        b.y = pyo.Var(initialize=1.0, bounds=(0.1, 10))
        b.first = pyo.Constraint(expr=2.0 * b.x * b.y == b.q)
        b.second = pyo.Constraint(expr=b.y + m.z + 0.1 * m.z**2 >= 0.2 * b.p)  # (z, z): one entry for all
        b.term = pyo.Expression(expr=(b.x - b.p) ** 2 / b.w + m.z * b.w)
    m.obj = pyo.Objective(expr=sum(m.b[i].term for i in range(built)) + m.z**2)
    return m


def _load(b, i, ps=(1.0, 2.0, 3.0), flows=(1.0, 1.5, 0.8)):
    b.p = ps[i]
    b.q = flows[i]
    b.w.fix(1.0 + i)
    b.x.value, b.y.value = 1.0 + 0.1 * i, 1.0 - 0.1 * i


@pytest.mark.parametrize("compact", [False, True])
def test_copies_of_a_template_solve_the_same_problem_as_built_blocks(compact):
    # Three blocks built against one built and two virtual copies: same optimum and point (the analytic
    # reference is the fully built model, same IPOPT), derivatives of the copied problem against finite
    # differences, and a copy's values readable through the template.
    from tubewright.optimizer.nlp.copies import Copies

    full = _copied_blocks(3)
    for i in range(3):
        _load(full.b[i], i)
    a = CompiledNLP(full, compact=compact)
    t = _copied_blocks(1)
    b = CompiledNLP(t, compact=compact, copies=[Copies(t.b[0], 2, objective_term=t.b[0].term)])
    store = b.copy_stores[0]
    for k in (1, 2):
        _load(t.b[0], k)
        store.capture(k)
    _load(t.b[0], 0)
    assert (b.n, b.m) == (a.n, a.m) and b.times["copies"] == 2
    assert len(b.forms) == len(a.forms)
    _fd_check(b, np.linspace(0.3, 1.7, b.n))
    out_a, out_b = a.solve(), b.solve()
    assert out_a.success and out_b.success
    assert out_b.objective == pytest.approx(out_a.objective, rel=1e-10)
    assert pyo.value(t.z) == pytest.approx(pyo.value(full.z), rel=1e-9)
    for k in (1, 2):
        x_k = store.instance(k, t.b[0].x)
        assert x_k.value == pytest.approx(pyo.value(full.b[k].x), rel=1e-9)
        assert out_b.x[store.column(k, t.b[0].x)] == x_k.value
        assert np.array_equal(out_b.x[store.columns(k)], store.x[k - 1])
        with store.loaded(k):  # the copy's values and inputs in the template
            assert pyo.value(t.b[0].term) == pytest.approx(pyo.value(full.b[k].term), rel=1e-9)
            assert pyo.value(2.0 * t.b[0].x * t.b[0].y) == pytest.approx(pyo.value(full.b[k].q), rel=1e-7)
        y_own = t.b[0].y.value
        with store.loaded(k, [t.b[0].x]):  # only x of the copy: y keeps the template's own value
            assert t.b[0].x.value == x_k.value and t.b[0].y.value == y_own
    assert pyo.value(t.b[0].p) == 1.0 and t.b[0].w.value == 1.0  # the template's own values are back
    assert pyo.value(t.b[0].x) == pytest.approx(pyo.value(full.b[0].x), rel=1e-9)
    # a changed input of a copy is read at the next solve, without recompiling
    store.instance(2, t.b[0].first)  # a constraint's stand-in exists
    _load(t.b[0], 2, ps=(1.0, 2.0, 4.0))
    store.capture(2)
    _load(t.b[0], 0)
    full.b[2].p = 4.0
    assert b.solve().objective == pytest.approx(a.solve().objective, rel=1e-10)


def _chain(count, shared_defined=False, bounded_copy=False):
    """The compact problem (made after the copies are loaded) of a template block of linear defining rows
    (a = 2 y + p; c = a + y + z with z shared by all copies;
    d = c - 3 y), a nonlinear row y d = 2 + p, and ``count`` copies. ``shared_defined``: the template also
    holds, first, z = 2 p + e, 0 <= e <= 10 (a row that defines the shared z); ``bounded_copy``: the last copy's c
    has a bound."""
    from tubewright.optimizer.nlp.copies import Copies
    from tubewright.optimizer.nlp.presolve import LinearElimination

    m = pyo.ConcreteModel()
    m.z = pyo.Var(initialize=0.5)
    m.b = pyo.Block([0])
    b = m.b[0]
    b.p = pyo.Param(mutable=True, initialize=1.0)
    b.a, b.c, b.d, b.e = (pyo.Var(initialize=1.0) for _ in range(4))
    b.y = pyo.Var(initialize=1.0, bounds=(0.1, 10.0))
    if shared_defined:  # the first row, and e has bounds: z is its only candidate
        b.e.setlb(0.0)
        b.e.setub(10.0)
        b.def_z = pyo.Constraint(expr=m.z == 2.0 * b.p + b.e)
    b.def_a = pyo.Constraint(expr=b.a == 2.0 * b.y + b.p)
    b.def_c = pyo.Constraint(expr=b.c == b.a + b.y + m.z)
    b.def_d = pyo.Constraint(expr=b.d == b.c - 3.0 * b.y)
    b.nl = pyo.Constraint(expr=b.y * b.d == 2.0 + b.p)
    b.term = pyo.Expression(expr=(b.a - b.p) ** 2 + b.c**2 + b.d**2 + b.e**2)
    m.obj = pyo.Objective(expr=b.term + m.z**2)
    nlp = CompiledNLP(m, compact=False, copies=[Copies(b, count, objective_term=b.term)])
    store = nlp.copy_stores[0]
    for k in range(1, count + 1):
        b.p = 1.0 + k
        store.capture(k)
    if bounded_copy:
        store.lb[count - 1, store.variable_position[id(b.c)]] = -50.0
    b.p = 1.0
    nlp.compact = LinearElimination(nlp)
    return nlp


@pytest.mark.parametrize("kind, replicated", [({}, True), ({"shared_defined": True}, False),
                                              ({"bounded_copy": True}, False)])
def test_copies_take_their_templates_choice_only_where_a_scan_would_agree(monkeypatch, kind, replicated):
    # The compact problem gives the copies of a template the template's defining rows without scanning
    # them (presolve._Choice.replicate) when nothing outside the template could tell them apart; else (a
    # template row defines a variable the copies share; a copy's variable has a bound the template's has
    # not) the copies' rows are scanned. Either way the choice is the one a scan of every row makes (the
    # reference: the same compilation with replication switched off), and the solve agrees.
    from tubewright.optimizer.nlp import presolve

    calls = []
    original = presolve._Choice.replicate
    monkeypatch.setattr(presolve._Choice, "replicate", lambda self, s: calls.append(original(self, s)) or calls[-1])
    nlp = _chain(3, **kind)
    assert calls == [replicated]
    monkeypatch.setattr(presolve._Choice, "replicate", lambda self, s: False)
    scanned = _chain(3, **kind)
    for name in ("rows", "eliminated", "kept", "kept_rows", "jac_rows", "jac_cols", "hess_rows", "hess_cols"):
        assert np.array_equal(getattr(nlp.compact, name), getattr(scanned.compact, name)), name
    assert len(nlp.compact.eliminated) >= 3 * 4 - (1 if kind.get("bounded_copy") else 0)
    a, b = nlp.solve(), scanned.solve()
    assert a.success and b.success
    assert a.x == pytest.approx(b.x, rel=1e-9, abs=1e-12)


def _determined(p=1.0):
    """u fixed by three linear rows of its own (one with an input coefficient q): u0 = p, q u1 - 2 u0 = 1,
    u1 + u2 = 3 p; x and y by a nonlinear problem that reads u."""
    m = pyo.ConcreteModel()
    m.p = pyo.Param(mutable=True, initialize=p)
    m.q = pyo.Param(mutable=True, initialize=1.0)
    m.u = pyo.Var(range(3), initialize=0.0)
    m.u[2].setlb(-10.0)
    m.u[2].setub(10.0)
    m.x = pyo.Var(initialize=1.0, bounds=(0.1, 5.0))
    m.y = pyo.Var(initialize=1.0)
    m.fix0 = pyo.Constraint(expr=m.u[0] == m.p)
    m.fix1 = pyo.Constraint(expr=m.q * m.u[1] - 2.0 * m.u[0] == 1.0)
    m.fix2 = pyo.Constraint(expr=m.u[1] + m.u[2] == 3.0 * m.p)
    m.link = pyo.Constraint(expr=m.x * m.u[0] + m.y == 2.0)
    m.floor = pyo.Constraint(expr=m.x * m.u[1] >= 1.5)
    m.obj = pyo.Objective(expr=(m.x - m.u[2]) ** 2 + m.y**2 * m.u[1] + m.x * m.y)
    return m


def test_determined_blocks_leave_ipopt_with_exact_multipliers():
    # u follows from its own linear rows (nlp.presolve's determined blocks): the compact problem leaves it
    # out and reports the same point and every multiplier as the whole problem (the reference, same IPOPT);
    # a changed input coefficient is read at the next solve; values outside u's bounds fall back to the
    # whole problem, which says the rows cannot hold.
    full, compact = _determined(), _determined()
    a = CompiledNLP(full, compact=False)
    b = CompiledNLP(compact)
    column = {id(v): j for j, v in enumerate(b.variables)}
    assert sorted(b.compact.block_cols.tolist()) == sorted(column[id(v)] for v in compact.u.values())
    assert b.times["ipopt_variables"] == 2
    for q in (1.0, 1.5):
        full.q, compact.q = q, q
        out_a, out_b = a.solve(), b.solve()
        assert out_a.success and out_b.success and "compact_fallback" not in out_b.times
        assert out_b.objective == pytest.approx(out_a.objective, rel=1e-10)
        assert out_b.x == pytest.approx(out_a.x, rel=1e-8, abs=1e-10)
        assert out_b.multipliers == pytest.approx(out_a.multipliers, rel=1e-6, abs=1e-9)
        assert pyo.value(compact.u[1]) == pytest.approx((1.0 + 2.0) / q, rel=1e-12)  # analytic: (1 + 2 p) / q
    compact.p = 8.0  # u2 = 24 - 17 / 1.5 > 10
    out = b.solve()
    assert "leave a bound" in out.times["compact_fallback"] and not out.success


def test_bounds_of_inputs_are_evaluated_once_per_distinct_expression_and_stay_apart():
    # x_i = 2 p_i q + 1 for i = 0..3 (Pyomo moves the input part into the bound): four bounds of one
    # structure, three distinct (p_2 is p_1), each read anew after an input changes.
    from tubewright.optimizer.nlp.structure import InputValues

    m = pyo.ConcreteModel()
    m.p = pyo.Param(range(3), mutable=True, initialize={0: 1.0, 1: 2.0, 2: 3.0})
    m.q = pyo.Param(mutable=True, initialize=0.5)
    m.x = pyo.Var(range(4), initialize=0.0)
    which = [0, 1, 1, 2]
    m.c = pyo.Constraint(range(4), rule=lambda m, i: m.x[i] == 2.0 * m.p[which[i]] * m.q + 1.0)
    m.obj = pyo.Objective(expr=sum((m.x[i] - 1.0) ** 2 for i in range(4)))
    bounds = InputValues([m.c[i].to_bounded_expression()[0] for i in range(4)])
    assert len(bounds._exprs) == 3
    assert bounds.values() == pytest.approx([2.0, 3.0, 3.0, 4.0])
    nlp = CompiledNLP(m, compact=False)
    m.p[1] = 5.0
    m.q = 1.0
    assert nlp.solve().success
    assert [pyo.value(m.x[i]) for i in range(4)] == pytest.approx([3.0, 11.0, 11.0, 7.0], rel=1e-9)


def test_a_sum_of_thousands_of_terms_compiles():
    # Python's compiler nests a + b + c ... and overflows at a few thousand terms: a long sum is printed as
    # one call. min sum_i x_i over 5,000 variables with x_i >= i / 1000: x_i = i / 1000 (analytic), the
    # objective at the start equal to Pyomo's.
    n = 5_000
    m = pyo.ConcreteModel()
    m.x = pyo.Var(range(n), bounds=lambda m, i: (i / 1000.0, None), initialize=5.0)
    m.keep = pyo.Constraint(expr=m.x[0] + m.x[1] >= -1.0)
    m.obj = pyo.Objective(expr=pyo.quicksum(m.x[i] for i in range(n)))
    nlp = CompiledNLP(m)
    nlp.refresh()
    assert nlp._obj(nlp.current_point()) == pytest.approx(pyo.value(m.obj), rel=1e-12)
    out = nlp.solve()
    assert out.success and out.objective == pytest.approx(sum(i / 1000.0 for i in range(n)), rel=1e-7)


@pytest.mark.slow
def test_large_compact_problems_keep_their_hessian_coordinates():
    # 47,000 kept variables: row * n + column passes 2**31 (the compact structure once overflowed 32-bit
    # sparse indices and IPOPT refused the Hessian). min sum x with x_i (x_i + 1) >= 2 (d_i = x_i + 1
    # eliminated): x_i = 1 (analytic).
    n = 47_000
    m = pyo.ConcreteModel()
    m.x = pyo.Var(range(n), bounds=(0.0, None), initialize=2.0)
    m.d = pyo.Var(range(n), initialize=3.0)
    m.define = pyo.Constraint(range(n), rule=lambda m, i: m.d[i] == m.x[i] + 1.0)
    m.floor = pyo.Constraint(range(n), rule=lambda m, i: m.x[i] * m.d[i] >= 2.0)
    m.obj = pyo.Objective(expr=pyo.quicksum(m.x[i] for i in range(n)))
    nlp = CompiledNLP(m)
    red = nlp.compact
    assert red is not None and red.n == n
    assert np.all(red.hess_rows >= red.hess_cols) and red.hess_rows.max() == n - 1
    out = nlp.solve()
    assert out.success and out.objective == pytest.approx(n, rel=1e-7)


def test_copies_stand_ins_are_made_on_first_use_and_keep_their_identity():
    # The copies' stand-ins (nlp.copies.StandIns) are made when read, not at compilation; a stand-in read
    # twice is the same object, its position is computed (index), and the pools list the model's own items
    # then each store's stand-ins copy after copy, as a list would: two templates, 3 and 2 copies.
    from tubewright.optimizer.nlp.copies import Copies, CopyConstraint, CopyVar

    t = _copied_blocks(2)
    nlp = CompiledNLP(t, copies=[Copies(t.b[0], 3, objective_term=t.b[0].term),
                                 Copies(t.b[1], 2, objective_term=t.b[1].term)])
    first, second = nlp.copy_stores
    assert all(x is None for s in (first, second) for kind in s.stand_ins for x in kind._made)
    n_own, m_own = nlp.model_size
    assert len(nlp.variables) == nlp.n == n_own + 3 * len(first.variables) + 2 * len(second.variables)
    assert len(nlp.constraints) == nlp.m
    v = nlp.variables[nlp.n - 1]
    assert isinstance(v, CopyVar) and v.store is second and (v.k, v.j) == (1, len(second.variables) - 1)
    assert nlp.variables[-1] is v and nlp.variables.index(v) == nlp.n - 1
    assert second.columns(2).stop == nlp.n  # the store's own arithmetic agrees with the pool
    c = first.instance(2, first.constraints[0])
    assert isinstance(c, CopyConstraint) and nlp.constraints.index(c) == first.rows(2).start
    assert nlp.constraints[first.rows(2).start] is c
    listed = list(nlp.constraints)
    assert len(listed) == nlp.m and listed[:m_own] == nlp.constraints[:m_own]
    assert [x.name for x in listed[m_own:m_own + len(first.constraints)]] == [
        f"{r.name} (copy 1)" for r in first.constraints]
    assert nlp.constraints.index(t.b[1].first) == listed.index(t.b[1].first)
    with pytest.raises(IndexError):
        nlp.variables[nlp.n]


def test_copies_refuse_a_template_outside_the_model():
    from tubewright.optimizer.nlp.copies import Copies

    t = _copied_blocks(1)
    t.other = pyo.Block()
    t.other.v = pyo.Var()
    with pytest.raises(ValueError, match="no active constraint"):
        CompiledNLP(t, copies=[Copies(t.other, 2)])
    with pytest.raises(ValueError, match="count must be at least 1"):
        CompiledNLP(t, copies=[Copies(t.b[0], 0)])


def test_paused_collection_restores_the_collector_and_leaves_garbage_collectable():
    import gc
    import weakref

    from tubewright.optimizer.nlp.garbage_collection import paused_collection

    class Node:
        pass

    assert gc.isenabled()
    with paused_collection():
        assert not gc.isenabled()
        a, b = Node(), Node()
        a.other, b.other = b, a  # a reference cycle: only the cyclic collector frees it
        alive = weakref.ref(a)
    assert gc.isenabled() and gc.get_freeze_count() == 0
    del a, b
    gc.collect()
    assert alive() is None
    # a caller's frozen objects stay frozen
    gc.freeze()
    try:
        frozen = gc.get_freeze_count()
        with paused_collection():
            Node()
        assert gc.get_freeze_count() == frozen
    finally:
        gc.unfreeze()


def test_structure_keys_separate_what_prints_differently_and_join_what_prints_alike():
    import pyomo.environ as pyo
    from tubewright.optimizer.nlp.bridge import _Printer
    from tubewright.optimizer.nlp.structure import structure_key as _structure

    m = pyo.ConcreteModel()
    m.x = pyo.Var(range(4), initialize=1.0)
    m.k = pyo.Param(mutable=True, initialize=2.0)
    m.fixed = pyo.Var(initialize=3.0)
    m.fixed.fix()
    shared = m.x[0] * m.x[1]
    exprs = {
        "base": m.k * pyo.exp(m.x[0]) + m.x[1] ** 2 + m.fixed,
        "other vars": m.k * pyo.exp(m.x[2]) + m.x[3] ** 2 + m.fixed,  # same structure: same key
        "other function": m.k * pyo.log(m.x[0]) + m.x[1] ** 2 + m.fixed,
        "other number": m.k * pyo.exp(m.x[0]) + m.x[1] ** 3 + m.fixed,
        "repeated var": m.k * pyo.exp(m.x[0]) + m.x[0] ** 2 + m.fixed,
        "input for number": 2.0 * pyo.exp(m.x[0]) + m.x[1] ** 2 + m.fixed,
        "shared subtree": shared + shared,
        "equal subtrees apart": m.x[0] * m.x[1] + m.x[0] * m.x[1],
    }
    keys = {name: _structure(e)[0] for name, e in exprs.items()}
    assert keys["base"] == keys["other vars"]
    assert len({keys[n] for n in exprs if n != "other vars"}) == len(exprs) - 1
    for e in exprs.values():  # the walk orders variables and inputs as the printer numbers them
        _, variables, inputs = _structure(e)
        printer = _Printer()
        printer.source("value", [e])
        assert [id(v) for v in variables] == [id(v) for v in printer.vars]
        assert [id(p) for p in inputs] == [id(p) for p in printer.inputs]
    # equal keys print to equal text
    assert _Printer().source("value", [exprs["base"]]) == _Printer().source("value", [exprs["other vars"]])


def dangling_model(extra_row: bool = False, u_in_objective: bool = False, cubic: bool = False):
    """x, y bounded with a nonlinear row; u and w free, held only by two rows of their own (nonlinear in w):
    a dangling block. ``extra_row`` puts u into a limit too, ``u_in_objective`` into the objective: then
    they are no block. ``cubic``: two blocks of one row each, u^3 and w^3 against x and y."""
    m = pyo.ConcreteModel()
    m.x = pyo.Var(bounds=(0.5, 5), initialize=1.0)
    m.y = pyo.Var(bounds=(0.5, 5), initialize=1.0)
    m.u = pyo.Var(initialize=0.0)
    m.w = pyo.Var(initialize=0.0)
    m.d = pyo.Var(initialize=0.0)  # defined by a linear row: the compact problem exists
    m.define_d = pyo.Constraint(expr=m.d == 2 * m.x - m.y)
    m.curve = pyo.Constraint(expr=m.x * m.y >= 2.0)
    if cubic:
        m.first = pyo.Constraint(expr=m.u**3 == m.x - 0.2)
        m.second = pyo.Constraint(expr=m.w**3 == m.y)
    else:
        m.first = pyo.Constraint(expr=m.u + pyo.exp(m.w) == m.x**2 + 5.0)
        m.second = pyo.Constraint(expr=m.u - m.w * m.y == 3.0)
    if extra_row:
        m.limit = pyo.Constraint(expr=m.u <= 50.0)
    m.obj = pyo.Objective(expr=(m.x - 3) ** 2 + (m.y - 0.2) ** 2 + m.d**2 + (m.u if u_in_objective else 0.0))
    return m


def _block_names(nlp):
    cut = nlp.compact.dangling if nlp.compact is not None else None
    if cut is None:
        return []
    return sorted(nlp.variables[nlp.compact.kept[j]].name for j in cut.cols)


def test_square_groups_keep_only_the_structurally_nonsingular_square_ones():
    # Label 5: rows {3, 4} x columns {7, 8}, a perfect matching exists (4-7, 3-8); label 2: 3 x 3 where
    # rows 1 and 2 reach column 0 only (no perfect matching); label 9: 2 rows, 1 column. By hand.
    from tubewright.optimizer.nlp.dangling import square_groups

    entries = [(3, 7, 5), (3, 8, 5), (4, 7, 5),
               (0, 0, 2), (1, 0, 2), (2, 0, 2), (0, 1, 2), (0, 2, 2),
               (5, 4, 9), (6, 4, 9)]
    r, c, label = (np.array(v) for v in zip(*entries))
    found = square_groups(r, c, label)
    assert [(rows.tolist(), cols.tolist()) for rows, cols in found] == [([3, 4], [7, 8])]
    assert square_groups(r[label == 2][:1], c[label == 2][:1], label[label == 2][:1])[0][0].tolist() == [0]


def test_a_dangling_block_is_left_to_newton_with_the_same_point_and_multipliers():
    # Reference: the same model solved with the block inside IPOPT's problem.
    nlp = CompiledNLP(dangling_model())
    assert _block_names(nlp) == ["u", "w"] and nlp.times["ipopt_variables"] == 2
    ref = nlp.solve(dangling=False)
    m = nlp.model
    for v in (m.x, m.y, m.u, m.w):
        v.set_value(1.0 if v.name in "xy" else 0.0)
    out = nlp.solve()
    assert ref.success and out.success and "dangling_fallback" not in out.times
    assert out.x == pytest.approx(ref.x, rel=1e-8, abs=1e-10)
    assert out.multipliers == pytest.approx(ref.multipliers, abs=1e-8)
    # the block's rows hold at the answer, and their multipliers are zero (stationarity in u and w)
    assert pyo.value(m.u + pyo.exp(m.w)) == pytest.approx(pyo.value(m.x**2 + 5.0), rel=1e-12)
    assert pyo.value(m.u - m.w * m.y) == pytest.approx(3.0, rel=1e-12)
    assert nlp.multiplier(m.first) == 0.0 and nlp.multiplier(m.second) == 0.0


@pytest.mark.parametrize("kw", [{"extra_row": True}, {"u_in_objective": True}])
def test_variables_read_elsewhere_are_no_dangling_block(kw):
    assert _block_names(CompiledNLP(dangling_model(**kw))) == []


def test_a_block_whose_values_leave_a_bound_is_solved_with_the_whole_problem():
    m = dangling_model()
    nlp = CompiledNLP(m)
    m.w.setlb(1.0)  # w = 0.854 without it: the bound binds, which only the whole problem can see
    out = nlp.solve()
    assert out.times["dangling_fallback"] == "the block's values leave a bound"
    assert out.success and pyo.value(m.w) == pytest.approx(1.0, abs=1e-6)
    assert out.bound_multipliers_lower[[v is m.w for v in nlp.variables].index(True)] > 1e-6


def test_a_block_newton_cannot_solve_falls_back_to_the_whole_problem(monkeypatch):
    from tubewright.optimizer.nlp import dangling

    m = dangling_model(cubic=True)
    m.u.set_value(1.0)
    m.w.set_value(1.0)
    nlp = CompiledNLP(m)
    assert _block_names(nlp) == ["u", "w"]
    monkeypatch.setattr(dangling, "NEWTON_STEPS", 1)  # too few for the cubic rows from u = w = 1
    out = nlp.solve()
    assert out.success and out.times["dangling_fallback"] == "Newton's method did not solve the block"
    assert pyo.value(m.u**3) == pytest.approx(pyo.value(m.x) - 0.2, abs=1e-7)
    assert pyo.value(m.w**3) == pytest.approx(pyo.value(m.y), abs=1e-7)
