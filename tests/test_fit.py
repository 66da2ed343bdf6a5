"""The kinetics fit (optimizer.fitting.estimate): synthetic laboratory data from known parameters on an
isothermal liquid tube, where first-order plug flow has the analytic conversion X = 1 - exp(-k tau)
(Levenspiel 1999, Chemical Reaction Engineering, ch. 5), compared with scipy.optimize.least_squares on that
analytic model; interval coverage over seeds; the Arrhenius reference temperature; excluded runs."""

import math

import numpy as np
import pytest
from builders import liquid_case
from scipy.optimize import least_squares
from tubewright.models.outcomes import Reason, Status
from tubewright.optimizer.fitting.estimate import fit
from tubewright.optimizer.output.casewriter import toml_text

R = 8.314462618
TRUE_K, TRUE_E, T_REF = 0.01, 50_000.0, 350.0
TAU = math.pi / 4 * 0.02**2 * 2.0 / (0.010 / 1000.0)  # 2 m of a 20 mm tube, 0.010 kg/s at 1000 kg/m^3
SIGMA = 0.01
TEMPS = np.linspace(330.0, 370.0, 8)


def analytic_conversion(k_ref, e_act, temps, t_ref=T_REF):
    return 1.0 - np.exp(-k_ref * np.exp(-e_act / R * (1.0 / temps - 1.0 / t_ref)) * TAU)


def write_lab(tmp_path, seed=0, fit_section=None, extra_rows=()):
    fit_section = fit_section or {"parameters": {"r1": {"k_ref": True, "activation_energy": True}},
                                  "errors": {"conversion": SIGMA}}
    data = liquid_case(**{"tube.length": "2 m", "numerics.finite_elements": 20, "fit": fit_section})
    data["chemistry"]["reactions"]["r1"].update(k_ref="0.005 1/s", activation_energy="70 kJ/mol")  # the start
    (tmp_path / "lab.toml").write_text(toml_text(data))
    x = analytic_conversion(TRUE_K, TRUE_E, TEMPS) + np.random.default_rng(seed).normal(0, SIGMA, TEMPS.size)
    rows = ["feed.temperature [K],tube.length [m],measured.conversion"]
    rows += [f"{float(t)!r},2.0,{float(v)!r}" for t, v in zip(TEMPS, x)] + list(extra_rows)
    (tmp_path / "runs.csv").write_text("\n".join(rows) + "\n")
    return tmp_path / "lab.toml", tmp_path / "runs.csv", x


def reference_fit(x, t_fit):
    """scipy least_squares on the analytic model, in the estimator's coordinates (k at t_fit, E_a)."""
    def residuals(p):
        return (analytic_conversion(p[0], p[1], TEMPS, t_fit) - x) / SIGMA

    sol = least_squares(residuals, [0.01, 60_000.0], x_scale=[0.01, 5e4], xtol=1e-14, ftol=1e-14, gtol=1e-14)
    return sol.x, np.linalg.inv(sol.jac.T @ sol.jac)


def test_fit_agrees_with_least_squares_on_the_analytic_model(tmp_path):
    case, data, x = write_lab(tmp_path)
    out = fit(case, data)
    assert out.status == Status.OK and out.reason == Reason.FITTED, out.message
    theta = np.array(list(out.estimates.values()))
    ref, ref_cov = reference_fit(x, out.reference_temperature)
    assert theta == pytest.approx(ref, rel=1e-4)  # collocation at 20 elements against the exact solution
    assert out.statistics.covariance == pytest.approx(ref_cov, rel=0.05)
    assert out.reference_temperature == pytest.approx(1.0 / np.mean(1.0 / TEMPS))
    k_case = out.case_values["r1"]["k_ref"]  # back at the case's own T_ref (350 K)
    assert k_case == pytest.approx(theta[0] * math.exp(-theta[1] / R * (1 / T_REF - 1 / out.reference_temperature)))
    assert len(out.residuals) == 8 and out.excluded == []
    assert out.solver["statistics_from"] == "collocation sensitivities"
    assert out.solver["mesh_check_sigma"] < 1e-2 and not out.warnings


def test_collocation_sensitivities_equal_the_integrators_central_differences(tmp_path, monkeypatch):
    # The same fit with its statistics from central differences of the adaptive integrator (the fall-back
    # when the model's rows do not fix its states): the same covariance and residuals within the mesh error.
    import tubewright.optimizer.fitting.estimate as estimate

    case, data, _ = write_lab(tmp_path)
    out = fit(case, data)
    monkeypatch.setattr(estimate, "residual_jacobian", lambda *args: None)
    ref = fit(case, data)
    assert ref.solver["statistics_from"] == "central differences of the adaptive integrator"
    assert out.statistics.covariance == pytest.approx(ref.statistics.covariance, rel=1e-5)  # 3.6e-7 measured
    fitted = [r["fitted"] for r in out.residuals]
    assert fitted == pytest.approx([r["fitted"] for r in ref.residuals], abs=1e-2 * SIGMA)


def test_sensitivities_of_the_compact_problem_equal_the_whole_models(tmp_path, monkeypatch):
    # The fit's sensitivities come from the presolve's compact problem (a quarter of the rows); the whole model's
    # Jacobian gives the same to rounding.
    import tubewright.optimizer.fitting.sensitivity as sensitivity

    case, data, _ = write_lab(tmp_path)
    used = []
    compact = sensitivity._compact_sensitivities
    monkeypatch.setattr(sensitivity, "_compact_sensitivities", lambda *a: used.append(compact(*a)) or used[-1])
    out = fit(case, data)
    assert len(used) == 1 and used[0] is not None
    monkeypatch.setattr(sensitivity, "_compact_sensitivities", lambda *a: None)
    whole = fit(case, data)
    assert out.statistics.covariance == pytest.approx(whole.statistics.covariance, rel=1e-8)
    assert [r["fitted"] for r in out.residuals] == pytest.approx([r["fitted"] for r in whole.residuals], rel=1e-12)


def test_reference_temperature_far_from_the_data_correlates_the_estimates(tmp_path):
    # near +-1 with T_ref far outside the runs, much smaller at the runs' mean reciprocal temperature
    far = {"parameters": {"r1": {"k_ref": True, "activation_energy": True}}, "errors": {"conversion": SIGMA},
           "reference_temperature": "600 K"}
    case, data, _ = write_lab(tmp_path, fit_section=far)
    corr_far = fit(case, data).statistics.correlation[0, 1]
    case, data, _ = write_lab(tmp_path)
    corr_auto = fit(case, data).statistics.correlation[0, 1]
    assert abs(corr_far) > 0.95 and abs(corr_auto) < 0.5


def test_a_run_that_cannot_be_simulated_is_listed_and_the_others_fitted(tmp_path):
    # 100 m of tube at 1.1 kPa falls to the pressure floor (1 kPa): that run is excluded, named by its row
    rows = ["350.0,100.0,0.5"]
    case, data, _ = write_lab(tmp_path, extra_rows=rows)
    text = data.read_text().replace("feed.temperature [K],tube.length [m],measured.conversion",
                                    "feed.temperature [K],tube.length [m],measured.conversion")
    lines = text.strip().split("\n")
    lines[0] += ",feed.pressure [bar]"
    lines[1:] = [line + (",0.011" if i == len(lines) - 2 else ",5") for i, line in enumerate(lines[1:])]
    data.write_text("\n".join(lines) + "\n")
    out = fit(case, data)
    assert out.status == Status.OK
    assert [e["row"] for e in out.excluded] == [9] and "pressure" in out.excluded[0]["reason"]
    assert len(out.residuals) == 8


@pytest.mark.slow
def test_intervals_cover_the_true_parameters_over_seeds(tmp_path):
    # 95 % intervals of k(T_fit) and E_a cover the true values in 90-99 % of 50 seeds (the estimator end to
    # end: collocation, IPOPT, simulated Jacobian, Gauss-Newton statistics)
    covered, seeds = np.zeros(2), 50
    for seed in range(seeds):
        case, data, _ = write_lab(tmp_path, seed=seed)
        out = fit(case, data)
        assert out.status == Status.OK, out.message
        t_fit = out.reference_temperature
        truth = np.array([TRUE_K * math.exp(-TRUE_E / R * (1 / t_fit - 1 / T_REF)), TRUE_E])
        lo, hi = out.statistics.intervals[:, 0], out.statistics.intervals[:, 1]
        covered += (lo <= truth) & (truth <= hi)
    rate = covered / seeds
    assert np.all((rate >= 0.90) & (rate <= 0.99)), rate


def test_cli_fit_writes_a_case_that_reproduces_the_fit(tmp_path, capsys):
    import json

    from tubewright.models import load_case
    from tubewright.models.simulator import simulate
    from tubewright.optimizer.cli import main

    case, data, _ = write_lab(tmp_path)
    out_dir = tmp_path / "out"
    assert main(["fit", str(case), "--data", str(data), "--out", str(out_dir)]) == 0
    printed = capsys.readouterr().out
    assert "95 % interval" in printed and "CAUTION" in printed
    assert "statistics from the collocation sensitivities; collocation mesh against the adaptive integrator" in printed
    answer = json.loads((out_dir / "fit.json").read_text())
    assert answer["status"] == "ok" and (out_dir / "fit.png").stat().st_size > 0
    first = answer["observations"][0]
    fitted = load_case(out_dir / "fitted.toml", {"feed.temperature": f"{float(TEMPS[0])!r} K"})
    x = simulate(fitted, checks=False).summary["conversion"]
    assert x == pytest.approx(first["fitted"], abs=1e-7)  # the written case is the fitted model


def test_cli_fit_bad_data_exit_code_and_json(tmp_path, capsys):
    from tubewright.optimizer.cli import main

    case, data, _ = write_lab(tmp_path)
    data.write_text(data.read_text().replace("measured.conversion", "measured.conversoin"))
    assert main(["fit", str(case), "--data", str(data)]) == 2
    err = capsys.readouterr().err
    assert "measured.conversoin" in err and "row 1" in err and str(data) in err
    case, data, _ = write_lab(tmp_path)
    assert main(["fit", str(case), "--data", str(data), "--json"]) == 0
    import json

    answer = json.loads(capsys.readouterr().out)  # exactly one JSON document on stdout
    assert answer["statistics"]["error_model"] == "stated" and "caution" in answer


def test_estimated_error_model_scales_the_covariance_by_the_residual_variance(tmp_path):
    # Gauss-Newton: Cov = s^2 (J'J)^-1 with the errors estimated, (J'J)^-1 with them stated (same weights)
    case, data, _ = write_lab(tmp_path)
    stated = fit(case, data).statistics
    case, data, _ = write_lab(tmp_path, fit_section={"parameters": {"r1": {"k_ref": True, "activation_energy": True}},
                                                     "errors": {"conversion": SIGMA}, "error_model": "estimated"})
    estimated = fit(case, data).statistics
    assert estimated.covariance == pytest.approx(stated.covariance * stated.residual_variance, rel=1e-6)
    assert estimated.variance_test is None and stated.variance_test is not None


@pytest.mark.parametrize("section,key", [
    ({"parameters": {"r9": {"k_ref": True}}, "errors": {"conversion": SIGMA}}, "fit.parameters.r9"),
    ({"parameters": {"r1": {"k_ref": True}}, "errors": {"outlet_flow": "2 %"}}, "fit.errors.conversion"),
    ({"parameters": {"r1": {"k_ref": True}}, "errors": {"conversion": "150 %"}}, "fit.errors.conversion"),
    ({"parameters": {"r1": {"k_ref": {"within": 0.5}}}, "errors": {"conversion": SIGMA}}, "within"),
    ({"parameters": {"r1": {"orders": True}}, "errors": {"conversion": SIGMA}}, "fit.parameters.r1.orders"),
    ({"parameters": {}, "errors": {"conversion": SIGMA}}, "fit.parameters"),
    # the liquid case's r1 has no adsorption term: one must be in the case before it can be freed
    ({"parameters": {"r1": {"adsorption": {"A": True}}}, "errors": {"conversion": SIGMA}},
     "fit.parameters.r1.adsorption.A"),
])
def test_bad_fit_sections_are_refused_with_their_key(tmp_path, section, key):
    from tubewright.models import CaseError

    case, data, _ = write_lab(tmp_path, fit_section=section)
    with pytest.raises(CaseError) as info:
        fit(case, data)
    assert key in str(info.value)


def test_multistart_keeps_the_best_optimum_and_reports_every_start(tmp_path):
    section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True}}, "errors": {"conversion": SIGMA},
               "starts": 3, "seed": 1}
    case, data, _ = write_lab(tmp_path, fit_section=section)
    many = fit(case, data)
    case, data, _ = write_lab(tmp_path)
    one = fit(case, data)
    starts = many.solver["starts"]
    assert starts["asked"] == 3 and starts["ran"] == 3 and starts["converged"] >= 2
    assert many.statistics.sum_of_squares <= one.statistics.sum_of_squares * (1 + 1e-6)
    assert list(many.estimates.values()) == pytest.approx(list(one.estimates.values()), rel=1e-5)  # one minimum


def nth_order_conversion(k, n, tau, c0):
    """Plug flow, constant density, rate k c^n: X = 1 - (1 + (n - 1) k tau c0^(n-1))^(1/(1-n)) (Levenspiel
    1999, Chemical Reaction Engineering, ch. 5)."""
    return 1.0 - (1.0 + (n - 1.0) * k * tau * c0 ** (n - 1.0)) ** (1.0 / (1.0 - n))


def test_a_reaction_order_is_fitted_with_the_kinetics(tmp_path):
    # true: order 1.6 in A, k(350 K) = 0.003 (m^3/mol)^0.6/s, E_a = 50 kJ/mol; runs at 4 temperatures and
    # 2 feed flows of A (the order shows only where the concentration varies)
    true_k, true_n = 0.003, 1.6
    volume = math.pi / 4 * 0.02**2 * 2.0
    rows = ["feed.temperature [K],feed.molar_flows.A [mol/s],measured.conversion"]
    rng = np.random.default_rng(11)
    conditions = [(t, fa) for t in (330.0, 343.0, 356.0, 370.0) for fa in (0.01, 0.004)]
    observed = []
    for t, fa in conditions:
        q = (0.1 * fa + 0.018 * 0.5) / 1000.0  # m^3/s of the liquid feed (A and the solvent S)
        k = true_k * math.exp(-TRUE_E / R * (1 / t - 1 / T_REF))
        x = nth_order_conversion(k, true_n, volume / q, fa / q) + rng.normal(0, SIGMA)
        observed.append((t, fa, q, x))
        rows.append(f"{t!r},{fa!r},{x!r}")
    section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True, "orders": {"A": {"min": 0.5,
                                                                                               "max": 3.0}}}},
               "errors": {"conversion": SIGMA}}
    case, data, _ = write_lab(tmp_path, fit_section=section)
    data.write_text("\n".join(rows) + "\n")
    out = fit(case, data)
    assert out.status == Status.OK, out.message
    t_fit = out.reference_temperature

    def residuals(p):
        return np.array([(nth_order_conversion(p[0] * math.exp(-p[1] / R * (1 / t - 1 / t_fit)), p[2], volume / q,
                                               fa / q) - x) / SIGMA for t, fa, q, x in observed])

    ref = least_squares(residuals, [0.003, 5e4, 1.5], x_scale=[1e-3, 5e4, 1.0], xtol=1e-14, ftol=1e-14).x
    theta = np.array(list(out.estimates.values()))
    assert list(out.estimates) == ["r1.k_ref", "r1.activation_energy", "r1.orders.A"]
    assert theta == pytest.approx(ref, rel=2e-4)
    lo, hi = out.statistics.intervals[2]
    assert lo < true_n < hi
    out_dir = tmp_path / "o"
    from tubewright.optimizer.cli import main

    assert main(["fit", str(case), "--data", str(data), "--out", str(out_dir)]) == 0
    from tubewright.models import load_case

    fitted = load_case(out_dir / "fitted.toml")
    assert fitted.reactions[0].orders["A"] == pytest.approx(theta[2])


def test_differential_runs_fit_the_rate_law_without_a_tube(tmp_path):
    # measured formation rates of A at the feed conditions: r_A = -k(T) c_A^n (power law with Arrhenius,
    # analytic); compared with least_squares on the analytic rates. Rates in mol/(L h) in the file:
    # converted to SI on reading.
    true_n = 1.4
    rng = np.random.default_rng(3)
    section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True, "orders": {"A": True}}},
               "errors": {"rate": "3 %", "conversion": SIGMA}}
    case, data, _ = write_lab(tmp_path, fit_section=section)
    true_k = 0.01  # (m^3/mol)^0.4/s at 350 K
    observed = []
    for t in (330.0, 340.0, 350.0, 360.0, 370.0):
        for fa in (0.01, 0.003):
            q = (0.1 * fa + 0.018 * 0.5) / 1000.0
            rate = -true_k * math.exp(-TRUE_E / R * (1 / t - 1 / T_REF)) * (fa / q) ** true_n  # mol/m^3/s
            observed.append((t, fa, q, rate * (1.0 + rng.normal(0, 0.03))))
    rows = ["feed.temperature [K],feed.molar_flows.A [mol/s],measured.rate.A [mol/L/h]"]
    rows += [f"{t!r},{fa!r},{r * 3.6!r}" for t, fa, q, r in observed]  # 1 mol/(m^3 s) = 3.6 mol/(L h)
    data.write_text("\n".join(rows) + "\n")
    out = fit(case, data)
    assert out.status == Status.OK, out.message
    assert out.solver["ipopt_variables"] == 3  # no tube block: the three parameters only
    t_fit = out.reference_temperature

    def residuals(p):
        return np.array([(-p[0] * math.exp(-p[1] / R * (1 / t - 1 / t_fit)) * (fa / q) ** p[2] - r) / (0.03 * abs(r))
                         for t, fa, q, r in observed])

    ref = least_squares(residuals, [0.01, 5e4, 1.0], x_scale=[1e-2, 5e4, 1.0], xtol=1e-14, ftol=1e-14).x
    assert np.array(list(out.estimates.values())) == pytest.approx(ref, rel=1e-6)
    lo, hi = out.statistics.intervals[2]
    assert lo < true_n < hi


def test_axial_temperatures_recover_the_kinetics(tmp_path):
    # Thermocouples along a cooled tube: data simulated by the adaptive integrator with known k and E_a (no
    # noise), fitted by the collocation estimator from another start; the two discretisations agree, so the
    # known values come back to the collocation error (20 elements). Invented test data.
    from tubewright.models.casefile import load_case
    from tubewright.models.simulator import simulate

    thermocouples = {"TC1": 0.3, "TC2": 0.8, "TC3": 1.5}
    fit_section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True}},
                   "errors": {"axial_temperature": "0.2 K", "conversion": 0.01},
                   "thermocouples": {k: f"{v} m" for k, v in thermocouples.items()}}
    data = liquid_case(**{"tube.length": "2 m", "numerics.finite_elements": 20, "fit": fit_section,
                          "coolant": {"mode": "constant", "temperature": "345 K"},
                          "heat_transfer": {"overall": "120 W/m^2/K"}, "feed.molar_flows.A": "0.03 mol/s"})
    data["chemistry"]["reactions"]["r1"].update(k_ref="0.02 1/s", activation_energy="60 kJ/mol")  # the truth
    (tmp_path / "true.toml").write_text(toml_text(data))
    rows = ["feed.temperature [K],measured.conversion," + ",".join(f"measured.axial_temperature.{k} [K]"
                                                                    for k in thermocouples)]
    for t_feed in (335.0, 345.0, 355.0):
        sim = simulate(load_case(tmp_path / "true.toml", {"feed.temperature": f"{t_feed} K"}), checks=False,
                       points=list(thermocouples.values()))
        temps = [float(np.interp(z, sim.columns["z_m"], sim.columns["T_K"])) for z in thermocouples.values()]
        assert max(temps) - t_feed > 2.0  # the thermocouples see the reaction heat
        rows.append(",".join(repr(float(v)) for v in [t_feed, sim.summary["conversion"], *temps]))
    (tmp_path / "runs.csv").write_text("\n".join(rows) + "\n")
    data["chemistry"]["reactions"]["r1"].update(k_ref="0.012 1/s", activation_energy="50 kJ/mol")  # the start
    (tmp_path / "lab.toml").write_text(toml_text(data))
    out = fit(tmp_path / "lab.toml", tmp_path / "runs.csv")
    assert out.status == Status.OK, out.message
    assert out.case_values["r1"]["k_ref"] == pytest.approx(0.02, rel=1e-3)
    assert out.case_values["r1"]["activation_energy"] == pytest.approx(60_000.0, rel=1e-3)
    temps = [r for r in out.residuals if r["quantity"].startswith("axial_temperature.")]
    assert len(temps) == 9 and max(abs(r["fitted"] - r["measured"]) for r in temps) < 0.01


def test_axial_temperature_columns_are_checked(tmp_path):
    from tubewright.models.errors import CaseError
    from tubewright.optimizer.fitting.data import read_runs

    data = liquid_case(**{"tube.length": "2 m"})
    (tmp_path / "lab.toml").write_text(toml_text(data))
    (tmp_path / "runs.csv").write_text("feed.temperature [K],measured.axial_temperature.TC9 [K]\n350,351\n")
    with pytest.raises(CaseError, match="thermocouple of \\[fit.thermocouples\\]") as err:
        read_runs(tmp_path / "runs.csv", tmp_path / "lab.toml", {"TC1": 0.5})
    assert err.value.key == "measured.axial_temperature.TC9"
    (tmp_path / "runs.csv").write_text("feed.temperature [K],measured.axial_temperature.TC1 [K]\n350,351\n")
    with pytest.raises(CaseError, match="outside this run's tube") as err:
        read_runs(tmp_path / "runs.csv", tmp_path / "lab.toml", {"TC1": 2.5})
    assert "row 1" in str(err.value)


def test_adsorption_constants_are_fitted_and_handed_over(tmp_path):
    # Langmuir-Hinshelwood rate r_A = -k(T) c_A / (1 + K_A(T) c_A), K_A(T) = K_ref exp(-dH_ads/R (1/T - 1/T_ref))
    # (Hougen and Watson form, e.g. Froment, Bischoff and De Wilde 2011, ch. 2): measured rates at the feed
    # conditions, compared with scipy least_squares on the analytic rate law; fitted.toml and the design case
    # carry the adsorption term, and screening reads its K back at the case's T_ref.
    true_k, true_ka, true_heat = 0.02, 0.004, -40_000.0  # 1/s and m^3/mol at 350 K, J/mol
    rng = np.random.default_rng(8)
    observed = []
    for t in (330.0, 340.0, 350.0, 360.0, 370.0):
        for fa in (0.01, 0.003, 0.001):
            q = (0.1 * fa + 0.018 * 0.5) / 1000.0
            c = fa / q
            k = true_k * math.exp(-TRUE_E / R * (1 / t - 1 / T_REF))
            ka = true_ka * math.exp(-true_heat / R * (1 / t - 1 / T_REF))
            observed.append((t, fa, c, -k * c / (1.0 + ka * c) * (1.0 + rng.normal(0, 0.02))))
    section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True, "adsorption": {"A": True}}},
               "errors": {"rate": "2 %", "conversion": SIGMA}}
    data = liquid_case(**{"tube.length": "2 m", "numerics.finite_elements": 20, "fit": section})
    data["chemistry"]["reactions"]["r1"].update(k_ref="0.01 1/s", activation_energy="60 kJ/mol", adsorption=[
        {"species": "A", "k_ref": "0.001 m^3/mol", "heat": "-20 kJ/mol"}])  # the start
    case = tmp_path / "lab.toml"
    case.write_text(toml_text(data))
    runs = tmp_path / "runs.csv"
    runs.write_text("\n".join(["feed.temperature [K],feed.molar_flows.A [mol/s],measured.rate.A [mol/m^3/s]"]
                              + [f"{t!r},{fa!r},{r!r}" for t, fa, c, r in observed]) + "\n")
    out = fit(case, runs)
    assert out.status == Status.OK, out.message
    assert list(out.estimates) == ["r1.k_ref", "r1.activation_energy", "r1.adsorption.A.k_ref",
                                   "r1.adsorption.A.heat"]
    t_fit = out.reference_temperature

    def residuals(p):
        return np.array([(-p[0] * math.exp(-p[1] / R * (1 / t - 1 / t_fit)) * c
                          / (1.0 + p[2] * math.exp(-p[3] / R * (1 / t - 1 / t_fit)) * c) - r) / (0.02 * abs(r))
                         for t, fa, c, r in observed])

    ref = least_squares(residuals, [0.02, 5e4, 0.003, -3e4], x_scale=[1e-2, 5e4, 1e-3, 3e4], xtol=1e-15,
                        ftol=1e-15, gtol=1e-15)
    theta = np.array(list(out.estimates.values()))
    assert theta == pytest.approx(ref.x, rel=1e-5)
    assert out.statistics.covariance == pytest.approx(np.linalg.inv(ref.jac.T @ ref.jac), rel=0.05)
    lo, hi = out.statistics.intervals[3]
    assert lo < true_heat < hi

    from tubewright.models import load_case
    from tubewright.optimizer.cli import main
    from tubewright.optimizer.screening.uncertain import read_uncertain

    out_dir = tmp_path / "o"
    assert main(["fit", str(case), "--data", str(runs), "--out", str(out_dir), "--design", str(case)]) == 0
    k_at_case_ref = theta[2] * math.exp(-theta[3] / R * (1 / T_REF - 1 / t_fit))
    (term,) = load_case(out_dir / "fitted.toml").reactions[0].adsorption
    assert (term.species, term.k_ref, term.heat) == ("A", pytest.approx(k_at_case_ref, rel=1e-12),
                                                     pytest.approx(theta[3], rel=1e-12))
    design = load_case(out_dir / "design-fitted.toml")
    items = read_uncertain(design)
    assert [u.path for u in items][2:] == ["chemistry.reactions.r1.adsorption.A.k_ref",
                                           "chemistry.reactions.r1.adsorption.A.heat"]
    at_mean = items[0].joint.case_values(np.zeros((1, 4)))
    assert float(at_mean["chemistry.reactions.r1.adsorption.A.k_ref"][0]) == pytest.approx(k_at_case_ref, rel=1e-9)
    # a design case without the fitted adsorption term cannot take the fitted kinetics
    from tubewright.models.errors import CaseError
    from tubewright.optimizer.output.fitreport import write_design_case

    plain = tmp_path / "plain.toml"
    plain.write_text(toml_text(liquid_case()))
    with pytest.raises(CaseError, match="chemistry.reactions.r1.adsorption"):
        write_design_case(tmp_path / "d.toml", load_case(plain), out)


@pytest.mark.parametrize("entry,key,words", [
    ("3", "fit.parameters.r1.adsorption.A", "must be true or a table"),
    ({"heat": {"min": "0 kJ/mol", "max": "-10 kJ/mol"}}, "fit.parameters.r1.adsorption.A.heat", "must be below"),
    ({"k_ref": {"within": 0.5}}, "fit.parameters.r1.adsorption.A.k_ref.within", ""),
    ({"entropy": True}, "fit.parameters.r1.adsorption.A", "entropy"),
])
def test_bad_adsorption_entries_are_refused_with_their_key(tmp_path, entry, key, words):
    from tubewright.models import load_case
    from tubewright.models.errors import CaseError
    from tubewright.models.parameters import si_unit
    from tubewright.optimizer.fitting.spec import read_fit

    data = liquid_case(fit={"parameters": {"r1": {"adsorption": {"A": entry}}}, "errors": {"conversion": SIGMA}})
    data["chemistry"]["reactions"]["r1"]["adsorption"] = [{"species": "A", "k_ref": "0.001 m^3/mol"}]
    (tmp_path / "lab.toml").write_text(toml_text(data))
    case = load_case(tmp_path / "lab.toml")
    with pytest.raises(CaseError) as info:
        read_fit(case)
    assert key in str(info.value) and words in str(info.value)
    # the same term as an uncertain or swept parameter path
    assert si_unit(case, "chemistry.reactions.r1.adsorption.A.k_ref", "f", "k") == "m^3/mol"
    for path, words in (("chemistry.reactions.r1.adsorption.B.k_ref", "no adsorption term"),
                        ("chemistry.reactions.r1.adsorption.A", "name the species and k_ref or heat"),
                        ("chemistry.reactions.r1.k_ref.x", "nothing follows")):
        with pytest.raises(CaseError, match=words):
            si_unit(case, path, "f", "k")


def test_runs_as_copies_of_one_block_fit_as_the_blocks_built_one_by_one(tmp_path):
    # Runs differing in feed temperature and flow, coolant temperature and tube length, with thermocouples
    # (the length places them on the mesh: one template per length) and a relative error: the fit whose
    # runs are copies of a built block (nlp.copies) solves the same problem as the fit that builds every
    # run's block, so estimates, covariance and residuals agree to round-off. Invented test data.
    fit_section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True}},
                   "errors": {"axial_temperature": "0.2 K", "conversion": "2 %"},
                   "thermocouples": {"TC1": "0.6 m"}}
    data = liquid_case(**{"tube.length": "2 m", "numerics.finite_elements": 12, "fit": fit_section,
                          "coolant": {"mode": "constant", "temperature": "345 K"},
                          "heat_transfer": {"overall": "120 W/m^2/K"}, "feed.molar_flows.A": "0.03 mol/s"})
    data["chemistry"]["reactions"]["r1"].update(k_ref="0.012 1/s", activation_energy="50 kJ/mol")
    (tmp_path / "lab.toml").write_text(toml_text(data))
    rows = ["feed.temperature [K],feed.molar_flows.A [mol/s],coolant.temperature [K],tube.length [m],"
            "measured.conversion,measured.axial_temperature.TC1 [K]"]
    rng = np.random.default_rng(3)
    for i, (t, length) in enumerate([(335.0, 2.0), (345.0, 2.0), (355.0, 2.0), (340.0, 1.5), (350.0, 1.5),
                                     (360.0, 1.5)]):
        rows.append(f"{t},{0.02 + 0.005 * i},{340.0 + 2 * i},{length},{0.3 + 0.05 * i + rng.normal(0, 0.01)},"
                    f"{t + 3.0 + rng.normal(0, 0.2)}")
    (tmp_path / "runs.csv").write_text("\n".join(rows) + "\n")
    shared = fit(tmp_path / "lab.toml", tmp_path / "runs.csv")
    built = fit(tmp_path / "lab.toml", tmp_path / "runs.csv", share_blocks=False)
    assert shared.status == Status.OK and built.status == Status.OK, (shared.message, built.message)
    assert shared.solver["copied_runs"] == 4 and built.solver["copied_runs"] == 0
    assert list(shared.estimates.values()) == pytest.approx(list(built.estimates.values()), rel=1e-8)
    assert shared.statistics.covariance == pytest.approx(built.statistics.covariance, rel=1e-6)
    assert [r["fitted"] for r in shared.residuals] == pytest.approx([r["fitted"] for r in built.residuals],
                                                                     rel=1e-8)
    assert shared.solver["statistics_from"] == built.solver["statistics_from"] == "collocation sensitivities"


def test_rates_measured_beside_conversions_follow_each_run(tmp_path):
    # Tube runs that measure the formation rate at the feed as well as the conversion, at different feed
    # temperatures and flows: the runs share one built block (copies), so the rate must be the rate law at
    # each run's own feed. Checked by the mesh check, which recomputes every residual at the estimate from
    # the adaptive integrator and the numpy rate law of each run's own case, and against building every
    # run's block. Invented test data.
    section = {"parameters": {"r1": {"k_ref": True, "activation_energy": True}},
               "errors": {"rate": "3 %", "conversion": SIGMA}}
    case, data, x = write_lab(tmp_path, fit_section=section)
    rng = np.random.default_rng(4)
    rows = ["feed.temperature [K],feed.molar_flows.A [mol/s],measured.conversion,measured.rate.A [mol/m^3/s]"]
    for t, xi in zip(TEMPS, x):
        fa = 0.01 if t < 350.0 else 0.006
        q = (0.1 * fa + 0.018 * 0.5) / 1000.0
        rate = -TRUE_K * math.exp(-TRUE_E / R * (1 / t - 1 / T_REF)) * fa / q
        rows.append(f"{float(t)!r},{fa!r},{float(xi)!r},{rate * (1.0 + rng.normal(0, 0.03))!r}")
    data.write_text("\n".join(rows) + "\n")
    shared = fit(case, data)
    built = fit(case, data, share_blocks=False)
    assert shared.status == Status.OK and built.status == Status.OK, (shared.message, built.message)
    assert shared.solver["copied_runs"] == 7 and built.solver["copied_runs"] == 0
    assert shared.solver["mesh_check_sigma"] < 1e-2 and not shared.warnings
    assert list(shared.estimates.values()) == pytest.approx(list(built.estimates.values()), rel=1e-8)


def test_start_values_by_array_are_the_simulation_at_each_point():
    # A run's starting values come from arrays (collocation.simulation_states, flat_states) placed by
    # state_positions, for a copy (the fit) as for the block itself (initialise_from_simulation): every
    # state and derivative variable gets a position of its own, and at each point the states equal the
    # simulation's profile there (per tube) and the derivatives L times the balances evaluated at that one
    # point (the scalar path of models.balances). Invented test data (a cooled liquid tube: all states vary).
    import pyomo.environ as pyo
    from builders import make
    from tubewright.models.backend import NUMPY
    from tubewright.models.balances import axial_derivatives
    from tubewright.models.simulator import simulate
    from tubewright.models.state import TAIL, StateLayout
    from tubewright.optimizer.design.collocation import (
        STATES,
        build_tube_model,
        flat_states,
        initialise_from_simulation,
        simulation_states,
        state_positions,
    )
    from tubewright.optimizer.design.spec import DesignSpec

    case = make(liquid_case(**{"numerics.finite_elements": 6, "coolant": {"mode": "constant", "temperature": "340 K"},
                               "heat_transfer": {"overall": "150 W/m^2/K"}}))
    sim = simulate(case, checks=False)
    m, _ = build_tube_model(case, DesignSpec(), 6, 3)
    variables = [v for name in STATES for v in getattr(m, name).values()]
    m.other = pyo.Var(initialize=1.0)
    positions = state_positions(m, case, variables + [m.other])  # a variable that is no state: -1
    flat = flat_states(simulation_states(m, case, sim))
    assert positions[-1] == -1 and len(set(positions[:-1].tolist())) == len(variables)  # each its own place
    assert 0 <= positions[:-1].min() and positions[:-1].max() < len(flat)
    initialise_from_simulation(m, case, sim)
    cols, layout, L, n = sim.columns, StateLayout.of(case), case.tube.length, case.tube.count
    for x in list(m.xi)[::5]:
        z = x * L
        F = [float(np.interp(z, cols["z_m"], cols[layout.column(s)])) / n for s in case.names]
        tail = {state: float(np.interp(z, cols["z_m"], cols[layout.column(state)])) for state in TAIL}
        d = axial_derivatives(NUMPY, case, F, tail["T"], tail["P"], tail["Tc"])
        inner = x > 0.0  # the derivatives are variables at the collocation points only
        for s, f, rate in zip(case.names, F, d.dF):
            assert pyo.value(m.F[s, x]) == pytest.approx(max(f, 0.0), rel=1e-12, abs=1e-300)
            if inner:
                assert pyo.value(m.dF[s, x]) == pytest.approx(L * float(rate), rel=1e-9, abs=1e-15)
        for state in TAIL:
            assert pyo.value(getattr(m, state)[x]) == pytest.approx(tail[state], rel=1e-12)
            if inner:
                assert pyo.value(getattr(m, f"d{state}")[x]) == pytest.approx(L * float(d.tail[state]), rel=1e-9,
                                                                              abs=1e-12)


def test_a_tube_without_output_states_solves_to_the_same_profiles():
    # The fit builds its tubes without the heat removed and the residence time (collocation.OUTPUT_STATES: no
    # balance reads them): the square collocation system of a fixed design then has the same flows,
    # temperatures and pressures at every point as the whole model. Invented test data (a cooled liquid tube).
    import pyomo.environ as pyo
    from builders import make
    from tubewright.models.simulator import simulate
    from tubewright.optimizer.design.collocation import OUTPUT_STATES, build_tube_model, initialise_from_simulation
    from tubewright.optimizer.design.spec import DesignSpec
    from tubewright.optimizer.nlp.bridge import CompiledNLP

    case = make(liquid_case(**{"numerics.finite_elements": 8, "coolant": {"mode": "constant", "temperature": "340 K"},
                               "heat_transfer": {"overall": "150 W/m^2/K"}}))
    sim = simulate(case, checks=False)
    profiles = []
    for outputs in (True, False):
        m, _ = build_tube_model(case, DesignSpec(), 8, 3, outputs=outputs)
        assert all(hasattr(m, s) == outputs for s in OUTPUT_STATES)
        initialise_from_simulation(m, case, sim)
        m.goal = pyo.Objective(expr=0.0 * m.T[1.0])
        out = CompiledNLP(m).solve(options={"tol": 1e-10})
        assert out.success, out.message
        profiles.append([pyo.value(v) for name in ("F", "T", "P", "Tc") for v in getattr(m, name).values()])
    assert profiles[1] == pytest.approx(profiles[0], rel=1e-9, abs=1e-12)
