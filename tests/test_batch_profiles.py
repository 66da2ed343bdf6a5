"""Profiles of many cases from shared integrations (models.batch.simulate_profiles), as a kinetics fit uses
them for its start values and its mesh check: against the analytic solution, against one-at-a-time
simulation, and the fall-back when a shared integration stops."""

import math

import numpy as np
from builders import liquid_case, make
from tubewright.models import simulate
from tubewright.models.batch import Profiles, sample_groups, simulate_profiles
from tubewright.models.results import PROFILE_POINTS, SimulationResult


def _space_time(case):
    mass = sum(f * s.molar_mass for f, s in zip(case.feed.molar_flows, case.species))
    return case.tube.area * case.tube.length * case.tube.count / (mass / case.feed.density)


def _rate_constant(case):
    """k [1/s] of the test reaction: Arrhenius about t_ref = 350 K (k_ref 0.01 1/s, E_a 50 kJ/mol)."""
    return 0.01 * math.exp(-50e3 / 8.314462618 * (1 / case.feed.temperature - 1 / 350.0))


def _runs(**changes):
    """Isothermal first-order liquid runs differing in feed temperature and flow (invented test data)."""
    return [make(liquid_case(**{"feed.temperature": f"{t} K", "feed.molar_flows.A": f"{a} mol/s", **changes}))
            for t, a in ((340, 0.01), (350, 0.02), (365, 0.005))]


def test_shared_profiles_follow_the_analytic_first_order_solution():
    # Analytic: F_A(z) = F_A0 exp(-k tau(z)), tau(z) proportional to z, for first-order isothermal plug flow at
    # constant density (Levenspiel 1999, Ch. 5); k from the Arrhenius law about t_ref = 350 K.
    cases = _runs()
    assert sample_groups(cases) == [[0, 1, 2]]
    out = simulate_profiles(cases, points=(3.3,))
    assert all(isinstance(p, Profiles) and p.ok for p in out)
    for case, p in zip(cases, out):
        k = _rate_constant(case)
        z = p.columns["z_m"]
        assert 3.3 in z
        expected = case.feed.molar_flows[0] * np.exp(-k * _space_time(case) * z / case.tube.length)
        np.testing.assert_allclose(p.columns["F_A_mol_s"], expected, rtol=1e-7, atol=1e-14)
        alone = simulate(case, checks=False)  # the same columns as one at a time, within the tolerance
        np.testing.assert_allclose(p.columns["F_A_mol_s"][-1], alone.columns["F_A_mol_s"][-1], rtol=1e-7)


def test_cases_differing_beyond_the_sample_values_are_not_shared():
    cases = [*_runs(), make(liquid_case(**{"tube.length": "5 m"})), make(liquid_case(**{"tube.count": 2}))]
    assert sample_groups(cases) == [[0, 1, 2], [3], [4]]
    short = _runs(**{"tube.length": "5 m"})
    assert sample_groups([cases[0], short[0], cases[1], short[1], short[2]]) == [[0, 2], [1, 3, 4]]
    out = simulate_profiles(cases)
    assert [type(p) for p in out] == [Profiles] * 3 + [SimulationResult] * 2


def test_a_shared_integration_that_stops_falls_back_to_one_at_a_time():
    # Adiabatic and exothermic (dH = -100 kJ/mol): the run fed at 350 K heats past the 360 K ceiling, the one fed
    # at 320 K stays below it. The shared integration stops; each run is then simulated alone and keeps its own
    # outcome.
    hot, cool = (make(liquid_case(**{"coolant.mode": "adiabatic", "numerics.temperature_ceiling": "360 K",
                                     "feed.temperature": t})) for t in ("350 K", "320 K"))
    assert sample_groups([hot, cool]) == [[0, 1]]
    out = simulate_profiles([hot, cool])
    assert [type(p) for p in out] == [SimulationResult, SimulationResult]
    assert not out[0].ok and out[1].ok
    alone = simulate(cool, checks=False, grid=PROFILE_POINTS)
    np.testing.assert_array_equal(out[1].columns["T_K"], alone.columns["T_K"])


def test_the_tolerance_given_replaces_the_cases_own():
    # Analytic as above. BDF's global error on a flow that decays by exp(-6.7) reaches tens of times rtol (the
    # mesh check of a fit, at 1e-8, stays far below its 0.1 sigma threshold all the same).
    cases = _runs(**{"numerics.rtol": 1e-3})
    exact = [c.feed.molar_flows[0] * math.exp(-_rate_constant(c) * _space_time(c)) for c in cases]

    def error(out):
        return max(abs(p.columns["F_A_mol_s"][-1] / e - 1) for p, e in zip(out, exact))

    own, given = error(simulate_profiles(cases)), error(simulate_profiles(cases, rtol=1e-9))
    assert given < 1e-6 < 1e-3 < own
