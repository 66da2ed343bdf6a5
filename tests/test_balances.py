"""One source of truth (numpy and Pyomo backends agree), balance closure on the demo cases, coolant modes
against independent integrations."""

import math

import numpy as np
import pytest
from builders import DEMO
from scipy.integrate import solve_bvp, solve_ivp
from tubewright.models import load_case, simulate
from tubewright.models.backend import NUMPY, pyomo_backend
from tubewright.models.balances import axial_derivatives


def _state(case):
    F = [f / case.tube.count + 1e-4 * (i + 1) for i, f in enumerate(case.feed.molar_flows)]
    return F, case.feed.temperature + 25.0, case.feed.pressure * 0.95, (case.coolant.temperature or 300.0) + 3.0


@pytest.mark.parametrize("name, overrides", [("oxidation.toml", {}), ("coil.toml", {}),
                                             ("oxidation.toml", {"heat_transfer.inside": "radial_lumped"})])
def test_numpy_and_pyomo_backends_agree(name, overrides):
    pyo = pytest.importorskip("pyomo.environ")
    case = load_case(DEMO / name, overrides)
    F, T, P, Tc = _state(case)
    ref = axial_derivatives(NUMPY, case, F, T, P, Tc)
    model = pyo.ConcreteModel()
    model.F = pyo.Var(range(len(F)), initialize=dict(enumerate(F)))
    model.T, model.P, model.Tc = pyo.Var(initialize=T), pyo.Var(initialize=P), pyo.Var(initialize=Tc)
    expr = axial_derivatives(pyomo_backend(), case, [model.F[i] for i in range(len(F))], model.T, model.P, model.Tc)
    pairs = list(zip(ref.dF, expr.dF)) + [(ref.dT, expr.dT), (ref.dP, expr.dP), (ref.dTc, expr.dTc),
                                          (ref.dQ, expr.dQ), (ref.dtau, expr.dtau)]
    for a, b in pairs:
        assert pyo.value(b) == pytest.approx(float(a), rel=1e-12, abs=1e-300)
    assert any(not isinstance(b, float) for _, b in pairs)  # the Pyomo side really built expressions


def _tight(case):
    from dataclasses import replace

    return replace(case, numerics=replace(case.numerics, rtol=1e-11, atol=1e-14))


@pytest.mark.parametrize("name", ["oxidation.toml", "coil.toml"])
def test_element_balance_closure(name):
    # Conservation of atoms (stoichiometry is a linear invariant the integrator keeps); the coil has no
    # formulas, so mass is checked for both: in = out to 1e-9 relative.
    case = load_case(DEMO / name)
    r = simulate(_tight(case), checks=False)
    assert r.ok
    f_in = np.array(case.feed.molar_flows)
    f_out = np.array([r.summary["outlet_molar_flow_mol_s"][n] for n in case.names])
    mass = np.array([s.molar_mass for s in case.species])
    assert f_out @ mass == pytest.approx(f_in @ mass, rel=1e-9)
    for el in sorted({e for s in case.species for e in s.elements}):
        counts = np.array([s.elements.get(el, 0) for s in case.species])
        assert f_out @ counts == pytest.approx(f_in @ counts, rel=1e-9)


@pytest.mark.parametrize("name", ["oxidation.toml", "coil.toml"])
def test_energy_balance_closure(name):
    # First law for the open system: sum F_i H_i(T) in = out + heat removed, to 1e-6 of the heat removed.
    case = load_case(DEMO / name)
    r = simulate(_tight(case), checks=False)
    f_in = np.array(case.feed.molar_flows)
    f_out = np.array([r.summary["outlet_molar_flow_mol_s"][n] for n in case.names])
    h_in = sum(f * s.enthalpy(NUMPY, case.feed.temperature) for f, s in zip(f_in, case.species))
    h_out = sum(f * s.enthalpy(NUMPY, r.summary["outlet_temperature_K"]) for f, s in zip(f_out, case.species))
    q = r.summary["heat_removed_W"]
    assert abs(h_in - h_out - q) <= 1e-6 * abs(q)
    assert abs(q) > 1.0


def _independent_rhs(case):
    """The coil's balances hand-written for this test (second-order liquid kinetics, constant U from the
    project's correlation at the inlet is NOT used: U is recomputed here from Gnielinski's formula)."""
    n = len(case.species)
    names = case.names
    rho, mu, k = case.feed.density, case.feed.viscosity, case.feed.thermal_conductivity
    d, t_w, k_w, h_o = (case.tube.inner_diameter, case.tube.wall_thickness, case.tube.wall_conductivity,
                        case.heat_transfer.outside)
    area = math.pi * d**2 / 4
    mm = np.array([s.molar_mass for s in case.species])
    cps = np.array([s.cp_model.value for s in case.species])
    hf = np.array([s.heat_of_formation for s in case.species])
    rxs = case.reactions

    def rhs(z, y, sign):
        F, T, Tc = y[:n], y[n], y[n + 2]
        mass = mm @ F
        vdot = mass / rho
        c = F / vdot
        dF = np.zeros_like(F)
        heat = 0.0
        for rx in rxs:
            kk = rx.k_ref * np.exp(-rx.activation_energy / 8.314462618 * (1 / T - 1 / rx.t_ref))
            r = kk * np.prod([c[names.index(s)] ** o for s, o in rx.orders.items()], axis=0)
            dh = 0.0
            for s, nu in rx.nu.items():
                dF[names.index(s)] += nu * r * area
                dh = dh + nu * (hf[names.index(s)] + cps[names.index(s)] * (T - 298.15))
            heat = heat - dh * r * area
        re = mass / area * d / mu
        pr = (cps @ F) / mass * mu / k
        f = (0.790 * np.log(re) - 1.64) ** -2
        nu_ = (f / 8) * (re - 1000) * pr / (1 + 12.7 * np.sqrt(f / 8) * (pr ** (2 / 3) - 1))
        h_i = nu_ * k / d
        d_o = d + 2 * t_w
        u = 1 / (1 / h_i + d * np.log(d_o / d) / (2 * k_w) + d / (d_o * h_o))
        q = u * math.pi * d * (T - Tc)
        out = np.zeros_like(y)
        out[:n] = dF
        out[n] = (heat - q) / (cps @ F)
        out[n + 2] = sign * q / (case.coolant.mass_flow * case.coolant.cp)
        return out

    return rhs


def test_countercurrent_against_independent_bvp():
    # Independent: the same physics hand-written here and solved as a boundary-value problem with
    # scipy.integrate.solve_bvp (coolant inlet at z = L), against the project's shooting solution.
    case = _tight(load_case(DEMO / "coil.toml"))
    r = simulate(case, checks=False)
    assert r.ok
    n = len(case.species)
    rhs = _independent_rhs(case)
    z = np.linspace(0, case.tube.length, 400)
    guess = np.vstack([np.interp(z, r.columns["z_m"], r.columns[c]) for c in
                       [f"F_{s}_mol_s" for s in case.names] + ["T_K", "P_Pa", "Tc_K"]])
    y0 = np.array(case.feed.molar_flows)

    def bc(ya, yb):
        return np.concatenate([ya[:n] - y0, [ya[n] - case.feed.temperature, ya[n + 1] - case.feed.pressure,
                                             yb[n + 2] - case.coolant.temperature]])

    sol = solve_bvp(lambda z, y: np.vstack([rhs(z, y, -1.0)[:n + 1], np.zeros_like(y[0]), rhs(z, y, -1.0)[n + 2]]),
                    bc, z, guess, tol=1e-8, max_nodes=100000)
    assert sol.success
    assert sol.sol(0.0)[n + 2] == pytest.approx(r.summary["coolant_outlet_temperature_K"], abs=2e-3)
    assert sol.sol(case.tube.length)[n] == pytest.approx(r.summary["outlet_temperature_K"], abs=2e-3)
    i = case.index(case.key_reactant)
    x_bvp = 1 - sol.sol(case.tube.length)[i] / y0[i]
    assert x_bvp == pytest.approx(r.summary["conversion"], abs=1e-5)


def test_cocurrent_against_independent_integration():
    # Independent: hand-written balances integrated with scipy's explicit DOP853 (not the project's path).
    from dataclasses import replace

    case = _tight(load_case(DEMO / "coil.toml"))
    case = replace(case, coolant=replace(case.coolant, mode="cocurrent"))
    r = simulate(case, checks=False)
    n = len(case.species)
    rhs = _independent_rhs(case)
    y0 = np.concatenate([case.feed.molar_flows, [case.feed.temperature, case.feed.pressure,
                                                 case.coolant.temperature]])
    ref = solve_ivp(lambda z, y: rhs(z, y, +1.0), (0, case.tube.length), y0, method="DOP853", rtol=1e-11,
                    atol=1e-13)
    assert ref.y[n, -1] == pytest.approx(r.summary["outlet_temperature_K"], abs=1e-6)
    assert ref.y[n + 2, -1] == pytest.approx(r.summary["coolant_outlet_temperature_K"], abs=1e-6)
    i = case.index(case.key_reactant)
    assert 1 - ref.y[i, -1] / y0[i] == pytest.approx(r.summary["conversion"], abs=1e-8)


def test_countercurrent_fallback_bracketing_finds_the_same_root():
    # The bracketing fallback (used when the secant iteration fails) must land on the secant's answer.
    from tubewright.models.simulator import shoot_countercurrent

    case = load_case(DEMO / "coil.toml")
    secant, _ = shoot_countercurrent(case)
    bracketed, why = shoot_countercurrent(case, guess=float("nan"))
    assert why == "converged" and bracketed == pytest.approx(secant, abs=1e-4)
