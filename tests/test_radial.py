"""The two-dimensional (radial) model: the collocation grid, the analytic Bessel solution, its limits against
the axial model, conservation, radial-grid convergence, the correlations' analytic limits and the input
refusals. Case data are invented for tests unless a source is named."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from builders import DEMO, liquid_case, make
from scipy.optimize import brentq
from scipy.special import j0, j1
from tubewright.models import correlations as corr
from tubewright.models.backend import NUMPY
from tubewright.models.casefile import load_case
from tubewright.models.errors import CaseError
from tubewright.models.outcomes import Status
from tubewright.models.radial import RadialLayout, integrate_radial, lumped_case, simulate_radial
from tubewright.models.radial_grid import radial_grid
from tubewright.models.simulator import simulate

# The demo with its coolant at 80 bar (576 K): the demo's own coolant (110 bar) runs away in 2-D, which is a
# finding, not a profile to compare grids on.
DEMO_RADIAL = {"coolant.pressure": "80 bar"}


@pytest.mark.parametrize("n", [1, 3, 6, 12])
def test_grid_quadrature_and_weak_laplacian(n):
    g = radial_grid(n)
    # Radau quadrature in u is exact to degree 2n: integral of u^k over 0..1 = 1/(k+1) (analytic)
    for k in range(2 * n + 1):
        assert g.mean @ g.u**k == pytest.approx(1.0 / (k + 1), rel=1e-12)
    assert np.allclose(g.stiffness, g.stiffness.T, atol=1e-12)
    assert np.abs(g.stiffness.sum(axis=0)).max() < 1e-11  # fluxes cancel in the mean: conservation
    # weak Laplacian of y = u^2 (Lap y = 16 u, wall term 4 u y'(1) = 8; analytic)
    y = g.u**2
    lhs = g.mean * 16.0 * g.u
    rhs = -g.stiffness @ y
    rhs[-1] += 8.0
    assert np.abs(lhs - rhs).max() < 1e-10
    assert g.centre @ (1.0 + 3.0 * g.u) == pytest.approx(1.0, abs=1e-12)


def _bessel_roots(bi, count):
    """Roots of beta J1(beta) = Bi J0(beta) (Carslaw and Jaeger, Conduction of Heat in Solids, 2nd ed. 1959,
    section 7.4), bracketed on a fine grid, J0 and J1 from scipy.special."""
    f = lambda b: b * j1(b) - bi * j0(b)  # noqa: E731
    grid = np.linspace(1e-9, (count + 1) * math.pi, 200 * (count + 1))
    v = f(grid)
    roots = [brentq(f, a, b, xtol=1e-15) for a, b, fa, fb in zip(grid, grid[1:], v, v[1:]) if fa * fb < 0]
    return np.array(roots[:count])


def _bessel_series(bi, fo, count=200):
    """Centre-line and mean of theta = (T - Tw)/(T0 - Tw) for a cylinder with a flat initial profile and a
    Robin wall (Carslaw and Jaeger, section 7.4): centre sum 2 Bi / ((b^2 + Bi^2) J0(b)) e^(-b^2 Fo), mean
    sum 4 Bi^2 / (b^2 (b^2 + Bi^2)) e^(-b^2 Fo)."""
    b = _bessel_roots(bi, count)
    e = np.exp(-np.outer(fo, b**2))
    return e @ (2 * bi / ((b**2 + bi**2) * j0(b))), e @ (4 * bi**2 / (b**2 * (b**2 + bi**2)))


def _conduction_case(lam, alpha, points=12, diameter=0.05):
    """The liquid test tube with no reaction (k 1e-30 1/s), a coolant at 300 K and heat_transfer.overall set
    to the lumped value, so that the 2-D wall coefficient is alpha_w exactly (no wall or coolant side)."""
    u_lumped = 1.0 / (1.0 / alpha + diameter / (8.0 * lam))
    return make(liquid_case(**{
        "coolant": {"mode": "constant", "temperature": "300 K"},
        "heat_transfer": {"overall": f"{u_lumped!r} W/m^2/K"},
        "chemistry.reactions.r1.k_ref": "1e-30 1/s", "tube.inner_diameter": f"{diameter * 1e3!r} mm",
        "radial": {"lambda_er": f"{lam!r} W/m/K", "alpha_w": f"{alpha!r} W/m^2/K", "points": points}}))


def _profiles(case, z, n):
    grid = radial_grid(n)
    sol = integrate_radial(case, grid)
    T = RadialLayout(len(case.species), n + 1).temperatures(sol.sol(z))
    return grid.centre @ T, grid.mean @ T


def _fourier(case, lam, z):
    c = sum(f * s.cp_model.value for f, s in zip(case.feed.molar_flows, case.species))  # W/K, constant
    return math.pi * lam * z / c  # lambda z / (G cp R^2)


def test_pure_conduction_matches_bessel_series():
    # Analytic: Carslaw and Jaeger section 7.4, Bi = alpha_w R / lambda_er = 2; 0.024 < Fo < 0.48.
    lam, alpha = 0.6, 48.0
    case = _conduction_case(lam, alpha)
    z = np.linspace(0.5, case.tube.length, 40)
    centre, mean = _profiles(case, z, 12)
    c_ref, m_ref = _bessel_series(alpha * 0.025 / lam, _fourier(case, lam, z))
    assert np.abs(centre - (300.0 + 50.0 * c_ref)).max() < 1e-4
    assert np.abs(mean - (300.0 + 50.0 * m_ref)).max() < 1e-4
    assert (centre - mean).max() > 1.0  # a real radial profile was compared


def test_small_biot_mean_matches_lumped_1d_within_lumping_error():
    # Analytic: at Bi = 0.1 the exact mean (Bessel series) and the lumped 1-D model exp(-2 Bi_U Fo), with
    # 1/U = 1/alpha_w + d_t/(8 lambda_er) (Froment and Bischoff), differ by a known amount; the 2-D model's
    # mean and the project's 1-D simulation with that U must differ by no more.
    lam, alpha = 0.6, 2.4
    case = _conduction_case(lam, alpha)
    z = np.linspace(0.5, case.tube.length, 40)
    _, mean = _profiles(case, z, 8)
    one_d = simulate(case, checks=False)
    t1 = np.interp(z, one_d.columns["z_m"], one_d.columns["T_K"])
    fo = _fourier(case, lam, z)
    u = case.heat_transfer.overall
    _, m_ref = _bessel_series(alpha * 0.025 / lam, fo)
    lumping_error = 50.0 * np.abs(m_ref - np.exp(-2.0 * u * 0.025 / lam * fo))
    assert lumping_error.max() < 0.01  # small Biot: the lumping is good to 0.01 K here
    # 1e-4 K: the linear interpolation of the 1-D profile on its 201 points
    assert np.all(np.abs(mean - t1) <= lumping_error + 1e-4)


def _tight(case, rtol=1e-10):
    return replace(case, numerics=replace(case.numerics, rtol=rtol, atol=1e-14))


def _reacting_liquid(lam, points=6):
    """The liquid test tube with its exothermic A -> D (dH = -100 kJ/mol), a 20-fold faster rate and a
    constant coolant at 350 K: a hot spot of several kelvin (invented test data)."""
    return make(liquid_case(**{
        "coolant": {"mode": "constant", "temperature": "350 K"}, "heat_transfer": {"overall": "150 W/m^2/K"},
        "chemistry.reactions.r1.k_ref": "0.2 1/s", "tube.inner_diameter": "50 mm", "tube.length": "3 m",
        "radial": {"lambda_er": f"{lam!r} W/m/K", "alpha_w": "400 W/m^2/K", "points": points}}))


def test_infinite_radial_conductivity_reduces_to_1d():
    # Analytic limit: as lambda_er -> infinity the radial profile flattens and, with heat_transfer.overall
    # given, the 2-D wall coefficient 1/(1/U - d_t/(8 lambda_er)) -> U: the 2-D model tends to the 1-D one
    # with U = alpha_w, its excess hot spot falling as 1/lambda_er (the centre-to-mean difference of a
    # conduction-limited profile, q R^2 / (8 lambda_er)).
    one = simulate(_reacting_liquid(1.0), checks=False)
    assert one.ok and one.summary["max_temperature_K"] - 350.0 > 5.0
    excess = {}
    for lam in (1.0e2, 1.0e3):
        two = simulate_radial(_tight(_reacting_liquid(lam), 1e-8))
        assert two.ok
        assert two.summary["conversion"] == pytest.approx(one.summary["conversion"], rel=1e-6)
        excess[lam] = two.summary["centre_hot_spot_K"] - one.summary["max_temperature_K"]
    assert 0.0 < excess[1.0e3] < 0.03
    assert excess[1.0e2] / excess[1.0e3] == pytest.approx(10.0, rel=0.05)


def test_finite_conductivity_raises_the_centre_above_the_1d_hot_spot():
    case = _reacting_liquid(2.0)  # 8 lambda_er / d_t = 320 W/(m^2 K) above the given U of 150
    two = simulate_radial(case)
    assert two.ok
    assert two.summary["centre_hot_spot_K"] > simulate(case, checks=False).summary["max_temperature_K"] + 0.5
    assert two.summary["hot_spot_radial_difference_K"] > 0.5
    profile = two.hot_spot_profile["T_K"]
    assert np.all(np.diff(profile) < 0)  # hottest on the axis, coolest at the wall


def test_element_and_energy_closure_on_the_demo():
    # Conservation: atoms and the first law (sum F_i H_i(T) in = out + heat to the coolant), to 1e-8.
    case = _tight(load_case(DEMO / "oxidation.toml", DEMO_RADIAL))
    grid = radial_grid(6)
    layout = RadialLayout(len(case.species), grid.n + 1)
    sol = integrate_radial(case, grid)
    assert sol.status == 0
    y = sol.y[:, -1]
    F, T, n_t = layout.flows(y), layout.temperatures(y), case.tube.count
    f_in = np.array(case.feed.molar_flows)
    f_out = n_t * (F @ grid.mean)
    for el in sorted({e for s in case.species for e in s.elements}):
        counts = np.array([s.elements.get(el, 0) for s in case.species])
        assert f_out @ counts == pytest.approx(f_in @ counts, rel=1e-8)
    h_in = sum(f * s.enthalpy(NUMPY, case.feed.temperature) for f, s in zip(f_in, case.species))
    h_out = n_t * sum(grid.mean @ (F[i] * s.enthalpy(NUMPY, T)) for i, s in enumerate(case.species))
    q = y[layout.tail_index("Q")]
    assert q > 1e5
    assert abs(h_in - h_out - q) <= 1e-8 * q


def test_radial_grid_convergence_on_the_demo():
    # The default of 6 interior points: the hot spot moves less than 0.1 K on doubling the grid.
    case = load_case(DEMO / "oxidation.toml", DEMO_RADIAL)
    six, twelve = simulate_radial(case, 6), simulate_radial(case, 12)
    assert six.ok and twelve.ok
    assert six.points == case.radial.points == 6
    assert abs(six.summary["centre_hot_spot_K"] - twelve.summary["centre_hot_spot_K"]) < 0.1
    assert six.summary["centre_hot_spot_K"] - simulate(case, checks=False).summary["max_temperature_K"] > 5.0


def test_demo_runaway_in_2d_is_reported_as_stopped():
    # The demo's own coolant: the 1-D model keeps below 630 K, the 2-D model with the correlations' lambda_er
    # and alpha_w runs away (what the radial criterion warned about).
    case = load_case(DEMO / "oxidation.toml")
    result = simulate_radial(case)
    assert result.status == Status.STOPPED and "ceiling" in result.reason
    assert simulate(case, checks=False).summary["max_temperature_K"] < 640.0


@pytest.mark.parametrize("coolant", [{"mode": "adiabatic"},
                                     {"mode": "cocurrent", "temperature": "345 K", "mass_flow": "0.02 kg/s",
                                      "cp": "4180 J/kg/K"}])
def test_adiabatic_equals_1d_and_cocurrent_closes_the_coolant_balance(coolant):
    # Adiabatic: no wall flux, so the radial profile stays flat and the 2-D model is the 1-D one (analytic).
    # Co-current: the coolant's temperature rise carries the heat removed (its balance, exactly).
    changes = {"chemistry.reactions.r1.k_ref": "0.2 1/s", "tube.inner_diameter": "50 mm", "tube.length": "3 m",
               "radial": {"lambda_er": "2 W/m/K", "alpha_w": "400 W/m^2/K"}, "coolant": coolant}
    if coolant["mode"] != "adiabatic":
        changes["heat_transfer"] = {"overall": "150 W/m^2/K"}
    case = make(liquid_case(**changes))
    two, one = simulate_radial(case), simulate(case, checks=False)
    assert two.ok and one.ok
    if coolant["mode"] == "adiabatic":
        assert two.summary["centre_hot_spot_K"] == pytest.approx(one.summary["max_temperature_K"], abs=1e-6)
        assert two.summary["hot_spot_radial_difference_K"] == pytest.approx(0.0, abs=1e-8)
    else:
        rise = two.summary["coolant_outlet_temperature_K"] - 345.0
        assert rise * 0.02 * 4180.0 == pytest.approx(two.summary["heat_removed_W"], rel=1e-9)
        assert two.summary["centre_hot_spot_K"] > one.summary["max_temperature_K"]


def test_countercurrent_and_isothermal_modes():
    base = liquid_case(**{"chemistry.reactions.r1.k_ref": "0.2 1/s", "tube.inner_diameter": "50 mm",
                          "radial": {"lambda_er": "2 W/m/K", "alpha_w": "400 W/m^2/K"}})
    counter = make({**base, "coolant": {"mode": "countercurrent", "temperature": "350 K", "mass_flow": "0.05 kg/s",
                                        "cp": "4180 J/kg/K"}, "heat_transfer": {"overall": "150 W/m^2/K"}})
    result = simulate_radial(counter)
    assert result.ok
    assert result.columns["Tc_K"][-1] == pytest.approx(350.0, abs=1e-4)  # the coolant enters at z = L
    iso = simulate_radial(make(base))
    assert iso.ok
    assert iso.summary["centre_hot_spot_K"] == pytest.approx(350.0, abs=1e-9)
    assert iso.summary["heat_removed_W"] > 0


def test_given_overall_above_the_conduction_limit_is_refused():
    case = make(liquid_case(**{"coolant": {"mode": "constant", "temperature": "300 K"},
                               "heat_transfer": {"overall": "500 W/m^2/K"}, "tube.inner_diameter": "50 mm",
                               "radial": {"lambda_er": "0.6 W/m/K", "alpha_w": "400 W/m^2/K"}}))
    result = simulate_radial(case)  # 8 lambda_er / d_t = 96 W/(m^2 K) < 500
    assert result.status == Status.FAILED and "8 lambda_er/d_t" in result.reason


def test_lumped_1d_case_uses_the_radial_data():
    case = load_case(DEMO / "oxidation.toml")
    lumped = lumped_case(case)
    assert lumped.heat_transfer.inside == "radial_lumped"
    from tubewright.models.balances import local_properties, overall_u, radial_transport

    local = local_properties(NUMPY, case, [f / case.tube.count for f in case.feed.molar_flows],
                             case.feed.temperature, case.feed.pressure)
    t = radial_transport(NUMPY, case, local)
    ht, tube = case.heat_transfer, case.tube
    expected = corr.overall_coefficient(NUMPY, 1.0 / (1.0 / t.alpha_w + tube.inner_diameter / (8 * t.lambda_er)),
                                        ht.outside, tube.inner_diameter, tube.wall_thickness, tube.wall_conductivity)
    assert overall_u(NUMPY, lumped, local) == pytest.approx(expected, rel=1e-12)


def test_zehner_schlunder_limits():
    # Analytic: k_s = k_f gives the fluid's conductivity; otherwise between the series and parallel
    # (Wiener) bounds of a two-phase medium.
    for e in (0.3, 0.4, 0.5):
        assert corr.zehner_schlunder_1970_static_conductivity(NUMPY, 0.05, 0.05, e, 1.25) == pytest.approx(0.05)
        for k_s in (0.2, 1.0, 10.0, 100.0):
            k = corr.zehner_schlunder_1970_static_conductivity(NUMPY, 0.05, k_s, e, 1.25)
            assert 1.0 / (e / 0.05 + (1 - e) / k_s) < k < e * 0.05 + (1 - e) * k_s
    # with no flow the Specchia form is the static conductivity alone
    assert corr.specchia_1980_radial_conductivity(NUMPY, 0.3, 0.05, 0.0, 0.7, 0.1) == 0.3


@pytest.mark.parametrize("changes, key", [
    ({"radial": {"points": 6}}, "radial.solid_conductivity"),
    ({"radial": {"solid_conductivity": "0.3 W/m/K", "points": 0}}, "radial.points"),
    ({"radial": {"solid_conductivity": "0.3 W/m/K", "lambda": "1 W/m/K"}}, "radial.lambda"),
    ({"radial": {"solid_conductivity": "0.3 W/m/K", "particle_shape": "ring"}}, "radial.particle_shape"),
    ({"radial": {"solid_conductivity": "-1 W/m/K"}}, "radial.solid_conductivity"),
    ({"radial": {"solid_conductivity": "0.3 K"}}, "radial.solid_conductivity"),
    ({"radial": None, "heat_transfer": {"inside": "radial_lumped", "outside": "5000 W/m^2/K"}},
     "heat_transfer.inside"),
])
def test_radial_input_refusals_packed(changes, key):
    from tubewright.models.casefile import read_toml

    data = read_toml(DEMO / "oxidation.toml")
    for k, v in changes.items():
        if v is None:
            data.pop(k, None)
        else:
            data[k] = v
    with pytest.raises(CaseError) as err:
        make(data, "demo-copy.toml")
    assert err.value.key == key and "demo-copy.toml" in str(err.value)


@pytest.mark.parametrize("radial, key", [
    ({"alpha_w": "400 W/m^2/K"}, "radial.lambda_er"),
    ({"lambda_er": "0.6 W/m/K"}, "radial.alpha_w"),
    ({"lambda_er": "0.6 W/m/K", "alpha_w": "400 W/m^2/K", "solid_conductivity": "1 W/m/K"},
     "radial.solid_conductivity"),
])
def test_radial_input_refusals_empty_tube(radial, key):
    with pytest.raises(CaseError) as err:
        make(liquid_case(radial=radial))
    assert err.value.key == key


def _tightening_case():
    """An exothermic liquid tube whose 1-D optimum (min volume at 90 % conversion, free length and coolant
    temperature) sits on its hot-spot limit of 362 K, 2 K below the 2-D centre line (invented test data)."""
    return make(liquid_case(**{
        "coolant": {"mode": "constant", "temperature": "350 K"}, "heat_transfer": {"overall": "150 W/m^2/K"},
        "chemistry.reactions.r1.k_ref": "0.002 1/s", "tube.inner_diameter": "50 mm", "feed.temperature": "340 K",
        "radial": {"lambda_er": "2 W/m/K", "alpha_w": "400 W/m^2/K"},
        "design": {"length": {"min": "0.5 m", "max": "100 m"}, "coolant_temperature": {"min": "330 K", "max": "380 K"}},
        "limits": {"min_conversion": 0.9, "max_temperature": "362 K"}, "goal": {"objective": "min_volume"},
        "numerics.finite_elements": 20}))


def test_optimize_radial_tightening_meets_the_limit_in_2d():
    from tubewright.optimizer import verbs

    res = verbs.optimize(_tightening_case(), radial_tighten=True)
    assert res.ok and res.simulation.summary["max_temperature_K"] == pytest.approx(362.0, abs=1e-3)
    check = res.extras["radial_check"]
    assert check["run"] and check["violated"] and check["figures"]["centre_hot_spot_K"] > 363.0
    assert check["met"] and len(check["passes"]) <= 3
    last = check["passes"][-1]
    assert last["hot_spot_2d_K"] <= 362.0 and last["hot_spot_1d_K"] < 360.0
    assert check["tightened"]["objective"] > res.objective  # the price of meeting the limit in 2-D
    # the tightened design re-simulated in 2-D from its reported values keeps the limit
    from tubewright.optimizer.design.problem import design_case
    from tubewright.optimizer.design.spec import values_by_key

    best = design_case(res.case, values_by_key(check["tightened"]["design"]))
    assert simulate_radial(best).summary["centre_hot_spot_K"] <= 362.0


def test_optimize_without_radial_warning_or_request_skips_the_2d_check():
    from tubewright.optimizer import verbs

    res = verbs.optimize(_tightening_case())  # an empty tube: the radial criterion does not apply
    assert res.ok and "radial_check" not in res.extras


def test_the_2d_check_run_by_the_second_process_gives_the_same_answer():
    # the command line without --out hands the optimum's 2-D check to its second process, beside the checks
    from tubewright.optimizer import verbs
    from tubewright.optimizer.output.second_process import SecondProcess

    case = load_case(DEMO / "oxidation-design.toml")
    here = verbs.optimize(case).extras["radial_check"]
    handed = []
    with SecondProcess(figures=False) as helper:
        def run(fn, *args):
            handed.append((fn.__name__, helper.run(fn, *args)))
            return handed[-1][1]

        there = verbs.optimize(case, run_elsewhere=run).extras["radial_check"]
        assert [name for name, _ in handed] == ["two_d_check"] and handed[0][1]._answer is not None  # answered there
        assert there == here and there["run"] and there["violated"]
        handed.clear()
        verbs.optimize(_tightening_case(), run_elsewhere=run)  # the radial criterion does not warn: nothing started
        assert handed == []


@pytest.mark.slow
def test_demo_optimum_fails_in_2d_and_the_lumped_pass_fixes_it(capsys, tmp_path):
    # The demo's 1-D optimum uses Leva's bed-to-wall coefficient; with the radial data (correlations of
    # models.correlations) the 2-D model runs away at that design. The first tightening pass re-optimises
    # with the coefficient lumped from the radial data and keeps the limit in 2-D; the case file written
    # for that design reproduces its 2-D hot spot.
    import json

    from tubewright.optimizer.cli import main

    code = main(["optimize", str(DEMO / "oxidation-design.toml"), "--radial-tighten", "--out", str(tmp_path)])
    out = capsys.readouterr().out
    assert code == 0
    assert "THE 1-D OPTIMUM VIOLATES THE HOT-SPOT LIMIT IN 2-D" in out
    assert "pass 1 (1-D heat transfer lumped from the radial data" in out
    assert "within the limit after 1 pass(es)" in out
    check = json.loads((tmp_path / "optimum.json").read_text())["radial_check"]
    hot = check["passes"][-1]["hot_spot_2d_K"]
    assert hot <= check["limit_K"]
    again = simulate_radial(load_case(tmp_path / "optimum-2d-checked.toml"))
    assert again.summary["centre_hot_spot_K"] == pytest.approx(hot, abs=1e-3)


def test_simulate_radial_cli_answer_and_files(tmp_path, capsys):
    import json

    from tubewright.optimizer.cli import main

    code = main(["simulate", str(DEMO / "oxidation.toml"), "--radial", "--set", 'coolant.pressure="80 bar"',
                 "--json", "--out", str(tmp_path)])
    answer = json.loads(capsys.readouterr().out)
    assert code == 0
    fig = answer["radial"]["figures"]
    assert fig["status_2d"] == "ok" and fig["grid_points"] == 12 and abs(fig["grid_difference_K"]) < 0.1
    assert fig["one_d_difference_K"] == pytest.approx(fig["centre_hot_spot_K"] - fig["one_d_hot_spot_K"])
    assert fig["lumped_difference_K"] > 5.0
    profile = answer["radial"]["hot_spot_profile"]
    assert profile["T_K"][0] == pytest.approx(fig["centre_hot_spot_K"]) and profile["radius_m"][-1] == 0.0127
    for name in ("radial-profiles.csv", "temperature-map.csv", "temperature-map.png", "radial-profiles.png"):
        assert (tmp_path / name).stat().st_size > 0
    import pandas as pd

    grid = pd.read_csv(tmp_path / "temperature-map.csv")
    assert grid.shape[1] == 12 and grid.iloc[:, 1].max() == pytest.approx(fig["centre_hot_spot_K"], abs=0.05)


def test_simulate_radial_refusals(capsys):
    from tubewright.optimizer.cli import main

    assert main(["simulate", str(DEMO / "coil.toml"), "--radial"]) == 2
    assert "[radial]: missing" in capsys.readouterr().err
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--radial-points", "4"]) == 2
    assert "--radial-points" in capsys.readouterr().err
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--radial", "--radial-points", "30"]) == 2


def test_2d_batch_equals_one_at_a_time_and_hands_over_a_runaway():
    # Four samples in one 2-D batch (models.batch.radial_model) against simulate_radial one by one: the same
    # figures to the integrator tolerance (the hot spot to 1e-3 K: located on the batch grid); the runaway
    # sample leaves the batch and keeps its own stopped result.
    from tubewright.models.batch import radial_model, simulate_batch
    from tubewright.models.parameters import apply

    case = load_case(DEMO / "oxidation-radial.toml")
    values = {"chemistry.reactions.combustion.k_ref": case.reactions[1].k_ref * np.array([0.8, 1.0, 1.2, 1.5]),
              "heat_transfer.multiplier": np.array([1.0, 0.95, 1.05, 1.0])}
    batch = simulate_batch(case, values, 4, model=radial_model(case))
    singles = [simulate_radial(apply(case, {p: float(v[j]) for p, v in values.items()})) for j in range(4)]
    assert [str(s) for s in batch.status] == ["ok", "ok", "ok", "stopped"] and batch.handed_over == 1
    assert singles[3].status == Status.STOPPED
    for j in range(3):
        s = singles[j].summary
        assert batch.outputs["max_temperature_K"][j] == pytest.approx(s["max_temperature_K"], abs=1e-3)
        for key in ("conversion", "production_rate_mol_s", "outlet_temperature_K", "pressure_drop_Pa"):
            assert batch.outputs[key][j] == pytest.approx(s[key], rel=1e-5)


def test_screen_with_the_2d_model_takes_its_hot_spot(capsys):
    # The same Sobol rows evaluated in 1-D and 2-D: the 2-D hot spot of every sample is the 2-D model's
    # (checked against simulate_radial on sample 0) and lies above the 1-D one at this coolant.
    from tubewright.models.parameters import apply
    from tubewright.optimizer.screening.evaluation import evaluate
    from tubewright.optimizer.screening.sampling import to_parameters
    from tubewright.optimizer.screening.uncertain import read_uncertain

    case = load_case(DEMO / "oxidation-screen.toml", DEMO_RADIAL)
    items = read_uncertain(case)
    unit_x = np.random.default_rng(3).uniform(0.1, 0.9, size=(3, len(items)))
    two = evaluate(case, items, unit_x, radial=True)
    one = evaluate(case, items, unit_x)
    values = {p: float(v[0]) for p, v in to_parameters(items, unit_x[:1]).items()}
    alone = simulate_radial(apply(case, values))
    assert alone.ok
    assert two.outputs["max_temperature_K"][0] == pytest.approx(alone.summary["max_temperature_K"], abs=1e-3)
    assert np.all(two.outputs["max_temperature_K"] > one.outputs["max_temperature_K"] + 5.0)
    from tubewright.optimizer import verbs
    from tubewright.optimizer.cli import main

    with pytest.raises(Exception, match="--reoptimise"):
        verbs.screen(case, "morris", 4, reoptimise=True, radial=True)
    assert main(["screen", str(DEMO / "oxidation-screen.toml"), "--radial", "--samples", "4", "--set",
                 'coolant.pressure="80 bar"']) == 0
    assert "model: two-dimensional (6 radial points" in capsys.readouterr().out


def test_radial_data_vary_in_screening_where_a_model_reads_them(tmp_path):
    # The pellet conductivity as an uncertain input: a 2-D batch with it varied equals simulate_radial one by
    # one (as above); refused where no model of the run reads [radial], and where the case has no single value.
    from tubewright.models.batch import radial_model, simulate_batch
    from tubewright.models.errors import CaseError
    from tubewright.models.parameters import apply, si_unit
    from tubewright.optimizer.screening.uncertain import read_uncertain, refuse_unused_radial_data

    case = load_case(DEMO / "oxidation-radial.toml")
    k_s = case.radial.solid_conductivity
    values = {"radial.solid_conductivity": k_s * np.array([0.5, 1.0, 2.0])}
    batch = simulate_batch(case, values, 3, model=radial_model(case))
    for j in range(3):
        s = simulate_radial(apply(case, {"radial.solid_conductivity": float(values["radial.solid_conductivity"][j])}))
        assert s.ok and batch.outputs["max_temperature_K"][j] == pytest.approx(s.summary["max_temperature_K"],
                                                                                abs=1e-3)
    # a better conducting pellet lowers the 2-D hot spot
    assert np.all(np.diff(batch.outputs["max_temperature_K"]) < 0.0)
    assert si_unit(case, "radial.solid_conductivity", "f", "k") == "W/m/K"
    for path, words in (("radial.alpha_w", "computed along the tube"), ("radial.lambda_er", "computed along")):
        with pytest.raises(CaseError, match=words):
            si_unit(case, path, "f", "k")
    given = load_case(DEMO / "oxidation-radial.toml", {"radial.lambda_er": "0.5 W/m/K"})
    with pytest.raises(CaseError, match="radial.lambda_er is given"):
        si_unit(given, "radial.solid_conductivity", "f", "k")
    with pytest.raises(CaseError, match="no \\[radial\\] table"):
        si_unit(load_case(DEMO / "coil.toml"), "radial.solid_conductivity", "f", "k")
    (tmp_path / "c.toml").write_text(f'include = "{DEMO / "oxidation-radial.toml"}"\n[uncertain.pellet]\n'
                                     'parameter = "radial.solid_conductivity"\ndistribution = "uniform"\n'
                                     "relative = true\nmin = 0.5\nmax = 2.0\n")
    screened = load_case(tmp_path / "c.toml")
    items = read_uncertain(screened)
    refuse_unused_radial_data(screened, items, two_dimensional=True)
    with pytest.raises(CaseError, match="uncertain.pellet"):
        refuse_unused_radial_data(screened, items, two_dimensional=False)
    lumped = load_case(tmp_path / "c.toml", {"heat_transfer.inside": "radial_lumped"})
    refuse_unused_radial_data(lumped, read_uncertain(lumped), two_dimensional=False)
