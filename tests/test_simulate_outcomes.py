"""Typed outcomes: stopped simulations keep their profile; the CLI prints the summary and JSON fields."""

import json

import numpy as np
import pytest
from builders import DEMO, liquid_case, make
from tubewright.models import load_case, simulate
from tubewright.models.outcomes import Reason
from tubewright.optimizer.cli import main

BRIEF_FIELDS = ["max_temperature_K", "max_temperature_position_m", "pressure_drop_Pa", "conversion",
                "selectivity", "outlet_molar_flow_mol_s", "heat_removed_W", "coolant_outlet_temperature_K",
                "length_m", "inner_diameter_m", "tube_count", "inlet_temperature_K", "residence_time_s"]


def test_pressure_floor_stops_with_profile():
    case = load_case(DEMO / "oxidation.toml", {"bed.particle_diameter": "0.3 mm", "tube.inner_diameter": "25.4 mm"})
    r = simulate(case, checks=False)
    assert r.status == "stopped" and "pressure fell" in r.reason
    assert r.summary["length_m"] < case.tube.length
    z = r.columns["z_m"]
    assert z[-1] == pytest.approx(r.summary["length_m"]) and len(z) > 10


def test_runaway_past_ceiling_stops_with_profile():
    case = load_case(DEMO / "oxidation.toml", {"coolant.pressure": "140 bar", "numerics.temperature_ceiling": "900 K"})
    r = simulate(case)
    assert r.status == "stopped" and r.reason_code == Reason.TEMPERATURE_CEILING and "ceiling" in r.reason
    assert np.max(r.columns["T_K"]) == pytest.approx(900.0, abs=1e-3)
    assert any(f.code == "limit_max_temperature" and f.level == "warning" for f in r.findings)


def test_runaway_sensitivity_rises_towards_runaway():
    # Morbidelli-Varma normalised sensitivity: larger closer to the runaway boundary (hotter coolant).
    def s_of(p):
        r = simulate(load_case(DEMO / "oxidation.toml", {"coolant.pressure": p}))
        return next(f.value for f in r.findings if f.code == "runaway_sensitivity_coolant")
    assert s_of("100 bar") < s_of("110 bar") < s_of("115 bar")


def test_reversible_reaction_reaches_given_equilibrium():
    # Analytic: a long isothermal reactor with A <=> D ends at c_D/c_A = K.
    data = liquid_case(**{"tube.length": "200 m"})
    data["chemistry"]["reactions"]["r1"].update({"equation": "A <=> D", "equilibrium_constant": "3"})
    r = simulate(make(data), checks=False)
    f = r.summary["outlet_molar_flow_mol_s"]
    assert f["D"] / f["A"] == pytest.approx(3.0, rel=1e-6)


def test_lhhw_inhibition_slows_the_rate():
    base = make(liquid_case())
    data = liquid_case()
    data["chemistry"]["reactions"]["r1"]["adsorption"] = [{"species": "A", "k_ref": "0.05 m^3/mol"}]
    slow = make(data)
    x0 = simulate(base, checks=False).summary["conversion"]
    x1 = simulate(slow, checks=False).summary["conversion"]
    assert x1 < x0


def test_cli_json_has_the_brief_fields(capsys):
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--json"]) == 0
    answer = json.loads(capsys.readouterr().out)
    for key in BRIEF_FIELDS:
        assert key in answer["summary"], key
    assert answer["status"] == "ok" and "Screening estimate" in answer["caution"]
    codes = {f["code"] for f in answer["findings"]}
    assert codes >= {"flow_regime", "runaway_sensitivity_coolant", "runaway_criterion"}


def test_cli_table_and_files(tmp_path, capsys):
    out = tmp_path / "run"
    assert main(["simulate", str(DEMO / "coil.toml"), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "hot-spot temperature" in text and " degC" in text and "CAUTION" in text
    import pandas as pd

    frame = pd.read_csv(out / "profiles.csv")
    assert {"z_m", "T_K", "P_Pa", "conversion"} <= set(frame.columns)
    assert (out / "profiles.png").stat().st_size > 10_000
    assert json.loads((out / "summary.json").read_text())["status"] == "ok"


def test_boiling_water_coolant_temperature_from_pressure():
    case = load_case(DEMO / "oxidation.toml")
    from tubewright.models.correlations import water_saturation_temperature

    assert case.coolant.temperature == pytest.approx(water_saturation_temperature(110e5))


def test_equilibrium_constant_from_gibbs_energy():
    # Analytic: with constant cp and zero delta-cp, K_a = exp(-(dH - T dS)/(R T)); for A <=> 2 B driven by
    # partial pressures K_p = K_a * P°^(dn), P° = 1 bar, and a long isothermal reactor ends at p_B^2/p_A = K_p.
    import math

    data = liquid_case(**{
        "chemistry.phase": "gas", "chemistry.product": "B",
        "feed.molar_flows": None, "feed.density": None,
        "feed.molar_flow": "0.02 mol/s", "feed.composition": {"A": 0.3, "S": 0.7},
        "feed.viscosity": "1e-12 Pa*s", "tube.roughness": "0 m", "tube.length": "400 m",
        "chemistry.species.A.entropy": "250 J/mol/K", "chemistry.species.B.entropy": "160 J/mol/K",
        "chemistry.species.B.cp": "75 J/mol/K", "chemistry.species.A.cp": "150 J/mol/K",
        "chemistry.species.B.heat_of_formation": "-40 kJ/mol",
    })
    data["chemistry"]["reactions"]["r1"] = {"equation": "A <=> 2 B", "orders": {"A": 1}, "k_ref": "1e-5 mol/m^3/s/Pa",
                                            "activation_energy": "50 kJ/mol", "t_ref": "350 K",
                                            "driving": "partial_pressure"}
    case = make(data)
    r = simulate(case, checks=False)
    f = r.summary["outlet_molar_flow_mol_s"]
    total = sum(f.values())
    p = r.summary["outlet_pressure_Pa"]
    dh, ds, T = 2 * -40e3 - -100e3, 2 * 160.0 - 250.0, 350.0
    k_p = math.exp(-(dh - T * ds) / (8.314462618 * T)) * 1e5
    assert (f["B"] * p / total) ** 2 / (f["A"] * p / total) == pytest.approx(k_p, rel=1e-5)


def test_cli_set_overrides_and_strict_json(capsys):
    # --set overrides reach the case; the JSON is strict (no NaN or Infinity constants).
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--json", "--set", "tube.length=2.5 m",
                 "--set", "tube.count=3000"]) == 0
    answer = json.loads(capsys.readouterr().out, parse_constant=lambda c: pytest.fail(f"non-JSON constant {c}"))
    assert answer["summary"]["length_m"] == pytest.approx(2.5)
    assert answer["summary"]["tube_count"] == 3000


def test_json_answer_turns_nan_into_null():
    from tubewright.optimizer.output.jsonsafe import finite as _finite

    assert _finite({"a": float("nan"), "b": [1.0, float("inf")], "c": "x"}) == {"a": None, "b": [1.0, None], "c": "x"}


def test_yield_and_selectivity_are_reported_for_the_product_only():
    # definitions (docs/case-reference.md): yield = F_formed / F_key,fed and selectivity = F_formed /
    # F_key,converted for the propene -> acrolein reaction of the demo (stoichiometric factor 1)
    case = load_case(DEMO / "oxidation.toml")
    s = simulate(case, checks=False).summary
    assert set(s["selectivity"]) == set(s["yield"]) == {case.product}
    fed = case.feed.molar_flows[case.index(case.key_reactant)]
    out = s["outlet_molar_flow_mol_s"]
    formed = out[case.product] - case.feed.molar_flows[case.index(case.product)]
    assert s["yield"][case.product] == pytest.approx(formed / fed, rel=1e-12)
    assert s["selectivity"][case.product] == pytest.approx(formed / (fed - out[case.key_reactant]), rel=1e-12)
