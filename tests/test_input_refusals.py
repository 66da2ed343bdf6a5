"""No silent wrong answers: every value means what it says, or the run refuses it with exit 2, naming the
file and the key. Each case below was once accepted, hung or ended in a traceback."""

from __future__ import annotations

import math
import time

import pytest
from builders import DEMO, liquid_case
from tubewright.models import CaseError, load_case
from tubewright.models.casefile import build_case
from tubewright.models.units import quantity, to_si
from tubewright.optimizer.cli import main

NAN, INF = float("nan"), float("inf")


# --- units ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("text, unit, expected, source", [
    # NIST SP 811 (2008), Appendix B.8/B.9 factors, IT Btu: 1 Btu/(h ft^2 degF) = 5.678263 W/(m^2 K)
    ("1 Btu/h/ft^2/degF", "W/m^2/K", 5.678263, "NIST SP 811"),
    ("1 Btu/lb/degF", "J/kg/K", 4186.8, "NIST SP 811 (IT Btu)"),
    # a Celsius (Kelvin-sized) interval inside a compound unit: the value is unchanged
    ("96.1 W/m^2/degC", "W/m^2/K", 96.1, "definition of the degree Celsius"),
    ("1 J/mol/degC", "J/mol/K", 1.0, "definition of the degree Celsius"),
    ("240 degC", "K", 513.15, "definition of the degree Celsius"),
    ("212 degF", "K", 373.15, "definition of the degree Fahrenheit"),
])
def test_temperatures_inside_compound_units_are_intervals(text, unit, expected, source):
    assert to_si(text, unit, "case.toml", "key") == pytest.approx(expected, rel=2e-6), source


def test_a_temperature_difference_takes_no_offset():
    # definitions of the degree Celsius and Fahrenheit: a 50 K interval is 50 degC or 90 degF
    assert quantity("50 degC", "temperature_difference", "f", "k") == pytest.approx(50.0)
    assert quantity("90 degF", "temperature_difference", "f", "k") == pytest.approx(50.0)
    assert quantity("50 degC", "temperature", "f", "k") == pytest.approx(323.15)


def test_heat_transfer_in_degc_gives_the_kelvin_answer():
    kelvin = load_case(DEMO / "oxidation.toml", {"heat_transfer.outside": "1500 W/m^2/K"})
    celsius = load_case(DEMO / "oxidation.toml", {"heat_transfer.outside": "1500 W/m^2/degC"})
    assert celsius.heat_transfer.outside == kelvin.heat_transfer.outside


@pytest.mark.parametrize("text", ["9**9**9 m", "10**400 m", "2**2**2**2**2 m", "nan m", "inf m", "1e300 m",
                                  "6 m**9999", "6 " + "m*" * 60, "6", "(6 m)", "6 m; import os"])
def test_quantities_are_read_without_arithmetic_and_within_limits(text):
    t0 = time.perf_counter()
    with pytest.raises(CaseError) as info:
        to_si(text, "m", "case.toml", "tube.length")
    assert time.perf_counter() - t0 < 1.0
    assert info.value.key == "tube.length"


# --- values that were accepted, hung or raised --------------------------------------------------------------

SHOMATE_INF = [{"t_min": "100 K", "t_max": "3000 K", "coefficients": [30.0, INF, 0, 0, 0, 0, 0, 0]}]


@pytest.mark.parametrize("changes, key", [
    ({"chemistry.species.A.cp": "nan J/mol/K"}, "chemistry.species.A.cp"),
    ({"chemistry.species.A.cp": "inf J/mol/K"}, "chemistry.species.A.cp"),
    ({"chemistry.species.A.cp": "0 J/mol/K"}, "chemistry.species.A.cp"),
    ({"chemistry.species.A.cp": {"shomate": SHOMATE_INF}}, "chemistry.species.A.cp.shomate[0].coefficients"),
    ({"heat_transfer": {"overall": "300 W/m^2/K", "multiplier": NAN}, "coolant": {"mode": "constant",
      "temperature": "340 K"}}, "heat_transfer.multiplier"),
    ({"heat_transfer": {"overall": "300 W/m^2/K", "multiplier": INF}, "coolant": {"mode": "constant",
      "temperature": "340 K"}}, "heat_transfer.multiplier"),
    ({"feed.composition": {"A": 1.0}}, "feed.molar_flows"),
    ({"feed.molar_flows": None, "feed.composition": {"A": 0.1, "S": 0.9}, "feed.molar_flow": "1 mol/s",
      "feed.mass_flow": "1 kg/s"}, "feed.mass_flow"),
    ({"chemistry.key_reactant": "S"}, "chemistry.key_reactant"),  # an inert: no reaction consumes it
    ({"chemistry.key_reactant": "B"}, "chemistry.key_reactant"),  # not in the feed
    ({"chemistry.product": "C"}, "chemistry.product"),  # no reaction forms it
    ({"feed.temperature": "1 K"}, "feed.temperature"),
    ({"feed.temperature": "5000 K"}, "feed.temperature"),  # above the temperature ceiling
    ({"numerics.finite_elements": "abc"}, "numerics.finite_elements"),
    ({"numerics.collocation_points": 50}, "numerics.collocation_points"),
    ({"chemistry.reactions.r1.k_ref": "1e300 1/s"}, "chemistry.reactions.r1.k_ref"),
    ({"chemistry.reactions.r1.k_ref": "inf 1/s"}, "chemistry.reactions.r1.k_ref"),
    ({"chemistry.reactions.r1.t_ref": "1e300 K"}, "chemistry.reactions.r1.t_ref"),
    ({"chemistry.reactions.r1.orders": {"A": NAN}}, "chemistry.reactions.r1.orders.A"),
    ({"feed.molar_flows": {"A": "1e-300 mol/s"}}, "feed"),
    ({"feed.pressure": "1e-300 Pa"}, "feed.pressure"),
    ({"tube.count": 1e-300}, "tube.count"),
    ({"tube.length": "9**9**9 m"}, "tube.length"),
    ({"tube.length": "10**400 m"}, "tube.length"),
])
def test_invalid_values_are_refused_naming_the_key(changes, key):
    t0 = time.perf_counter()
    with pytest.raises(CaseError) as info:
        build_case(liquid_case(**changes), "bad.toml")
    assert time.perf_counter() - t0 < 2.0
    assert info.value.source == "bad.toml"
    assert info.value.key == key, str(info.value)


def test_bed_values_are_refused():
    for bed, key in (({"particle_diameter": "1e-300 m", "voidage": 0.4, "density": "1000 kg/m^3"},
                      "bed.particle_diameter"),
                     ({"particle_diameter": "3 mm", "voidage": NAN, "density": "1000 kg/m^3"}, "bed.voidage")):
        with pytest.raises(CaseError) as info:
            build_case(liquid_case(bed=bed), "bad.toml")
        assert info.value.key == key


def test_adsorption_exponent_nan_is_refused():
    rx = {"equation": "A -> D", "orders": {"A": 1}, "k_ref": "0.01 1/s", "activation_energy": "50 kJ/mol",
          "t_ref": "350 K", "adsorption": [{"species": "A", "k_ref": "0.1 m^3/mol", "exponent": NAN}]}
    with pytest.raises(CaseError) as info:
        build_case(liquid_case(**{"chemistry.reactions.r1": rx}), "bad.toml")
    assert info.value.key == "chemistry.reactions.r1.adsorption[0].exponent"


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize("body, key", [
    ('include = ""\n', "include"),
    ('include = "."\n', "include"),
    ('include = "/dev/zero"\n', "include"),
    ('title = "x\x00y"\n', ""),
    ("x = " + "[" * 5000 + "]" * 5000 + "\n", ""),
])
def test_bad_files_and_includes_are_refused(tmp_path, body, key):
    path = _write(tmp_path, "bad.toml", body)
    with pytest.raises(CaseError) as info:
        load_case(path)
    assert info.value.key == key


def test_a_long_include_chain_stops(tmp_path):
    for i in range(1500):
        _write(tmp_path, f"c{i}.toml", f'include = "c{i + 1}.toml"\n')
    _write(tmp_path, "c1500.toml", 'title = "end"\n')
    with pytest.raises(CaseError) as info:
        load_case(tmp_path / "c0.toml")
    assert "nested deeper" in str(info.value)


def test_keys_that_do_not_apply_to_the_mode_are_refused():
    data = liquid_case(**{"coolant": {"mode": "boiling_water", "pressure": "20 bar", "temperature": "480 K"},
                          "heat_transfer": {"overall": "300 W/m^2/K"}})
    with pytest.raises(CaseError) as info:
        build_case(data, "bad.toml")
    assert info.value.key == "coolant.temperature" and "does not apply" in str(info.value)
    data = liquid_case(**{"limits": {"runaway_margin": 1.0}})  # isothermal: no coolant to run away from
    with pytest.raises(CaseError) as info:
        build_case(data, "bad.toml")
    assert info.value.key == "limits.runaway_margin"


# --- the command line ------------------------------------------------------------------------------------------

def test_misspelled_limit_on_the_command_line_is_refused(capsys):
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--set", 'limits.max_temprature=600 K']) == 2
    err = capsys.readouterr().err
    assert "limits.max_temprature" in err and 'did you mean "max_temperature"' in err


def test_set_values_are_toml(capsys):
    from tubewright.optimizer.cli import _parse_sets

    assert _parse_sets(["design.round_tube_count=false", "tube.count=12", "tube.length=6 m",
                        'coolant.mode="constant"', "x=[1, 2]"]) == {
        "design.round_tube_count": False, "tube.count": 12, "tube.length": "6 m", "coolant.mode": "constant",
        "x": [1, 2]}


@pytest.mark.parametrize("args, option", [
    (["--samples", "1000000000"], "--samples"),
    (["--samples", "100000"], "--samples"),
    (["--method", "sobol", "--samples", "16777216"], "--samples"),
    (["--method", "sobol", "--samples", "3"], "--samples"),
    (["--workers", "0"], "--workers"),
    (["--workers", "-1"], "--workers"),
])
def test_screening_options_are_checked_up_front(args, option, capsys):
    t0 = time.perf_counter()
    assert main(["screen", str(DEMO / "oxidation-screen.toml"), *args]) == 2
    assert f"[{option}]" in capsys.readouterr().err
    assert time.perf_counter() - t0 < 5.0


def test_a_screening_over_the_time_budget_is_refused(capsys):
    assert main(["screen", str(DEMO / "oxidation-screen.toml"), "--samples", "2000", "--max-hours", "1e-6"]) == 2
    assert "budget" in capsys.readouterr().err


@pytest.mark.parametrize("task, key", [
    ('kind = "screen"\npolicy = "cens0r"\n', "task[0].policy"),
    ('kind = "screen"\nsamples = "ten"\n', "task[0].samples"),
    ('kind = "screen"\nmethod = "sobol"\nsamples = 100\n', "task[0].samples"),
    ('kind = "optimize"\nstarts = -2\n', "task[0].starts"),
    ('kind = "optimize"\nstarts = [1]\n', "task[0].starts"),
    ('kind = "optimize"\nideal = "no"\n', "task[0].ideal"),
    ('kind = "simulate"\nname = 5\n', "task[0].name"),
    ('kind = "simulate"\ntimeout = "nan s"\n', "task[0].timeout"),
    ('kind = "sweep"\nlatin_hypercube = 5\n', "task[0].latin_hypercube"),
    ('kind = "sweep"\nlatin_hypercube = { samples = 3, ranges = { "tube.length" = ["2 m", "3 kg"] } }\n',
     "task[0].latin_hypercube.ranges.tube.length"),
    ('kind = "sweep"\nlatin_hypercube = { samples = 3, ranges = { "tube.length" = ["2 m", 3] } }\n',
     "task[0].latin_hypercube.ranges.tube.length"),
    ('kind = "sweep"\nlatin_hypercube = { samples = 3, seed = "x", ranges = { "tube.length" = ["2 m", "3 m"] } }\n',
     "task[0].latin_hypercube.seed"),
    ('kind = "sweep"\nlatin_hypercube = { samples = 3, ranges = { "tube.length" = ["2 m", "3 m", "4 m"] } }\n',
     "task[0].latin_hypercube.ranges.tube.length"),
    ('kind = "sweep"\ngrid = { "coolant.presure" = ["100 bar"] }\n', "task[0].grid"),
    ('kind = "simulate"\ncase = "."\n', "task[0].case"),
    # a key of another kind is refused, not ignored
    ('kind = "optimize"\npoints = 4\n', "task[0].points"),
    ('kind = "pareto"\nstarts = 2\n', "task[0].starts"),
    ('kind = "simulate"\nseed = 1\n', "task[0].seed"),
    ('kind = "screen"\nscenarios = 4\n', "task[0].scenarios"),
    ('kind = "robust"\nscenarios = 0\n', "task[0].scenarios"),
    ('kind = "robust"\nverify_samples = 3\n', "task[0].verify_samples"),
])
def test_study_options_are_checked_naming_the_key(tmp_path, task, key):
    from tubewright.optimizer.study.spec import load_study

    path = _write(tmp_path, "study.toml", f'base = "{DEMO / "oxidation-screen.toml"}"\n[[task]]\n{task}')
    with pytest.raises(CaseError) as info:
        load_study(path)
    assert info.value.key == key


def test_an_unsimulable_starting_design_is_a_failed_optimisation_not_a_traceback(capsys, monkeypatch):
    import tubewright.optimizer.design.problem as problem_module
    from tubewright.models.outcomes import Reason, Status
    from tubewright.models.results import SimulationResult

    def nothing(case, checks=False):  # a start whose integration fails at once: no profile at all
        return SimulationResult(Status.FAILED, "integrator error: test", {}, {}, reason_code=Reason.INTEGRATOR_ERROR)

    monkeypatch.setattr(problem_module, "simulate", nothing)
    assert main(["optimize", str(DEMO / "oxidation-design.toml")]) == 1
    out = capsys.readouterr()
    assert "starting design cannot be simulated" in out.out and "Traceback" not in out.err + out.out


def test_a_bug_is_one_line_and_a_saved_traceback(capsys, monkeypatch):
    import tubewright.optimizer.verbs as verbs

    def broken(case, **options):
        raise KeyError("a deliberate bug")

    monkeypatch.setattr(verbs, "simulate", broken)
    assert main(["simulate", str(DEMO / "oxidation.toml")]) == 3
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("internal error: KeyError") and "traceback saved in" in err[0]


def test_every_reported_number_is_finite_on_the_demo():
    from tubewright.models import simulate

    s = simulate(load_case(DEMO / "oxidation.toml")).summary
    numbers = [v for v in s.values() if isinstance(v, float)]
    assert numbers and all(math.isfinite(v) for v in numbers)


@pytest.mark.parametrize("top, key", [
    ('title = [1, 2]\nbase = "X"\n[[task]]\nkind = "simulate"\n', "title"),
    ('base = 5\n[[task]]\nkind = "simulate"\n', "base"),
    ('base = "X"\ntask = 5\n', "task"),
    ('base = "X"\nseed = "s"\n[[task]]\nkind = "simulate"\n', "seed"),
])
def test_study_top_level_keys_are_checked(tmp_path, top, key):
    from tubewright.optimizer.study.spec import load_study

    path = _write(tmp_path, "study.toml", top.replace('"X"', f'"{DEMO / "oxidation.toml"}"'))
    with pytest.raises(CaseError) as info:
        load_study(path)
    assert info.value.key == key


@pytest.mark.parametrize("basis", ["volume", "catalyst_mass"])
@pytest.mark.parametrize("driving", ["concentration", "partial_pressure"])
@pytest.mark.parametrize("order", [0.0, 1.0, 1.3, 2.0, 1.5743725255127203, 1.0 / 3.0, 2.75])
def test_the_unit_of_k_ref_for_any_order_reads_back(basis, driving, order):
    # the unit an error message shows as an example (and a fit writes) is accepted for that order, although
    # fractional exponents computed two ways differ in their last bits
    from tubewright.models.reactions import rate_units

    unit = rate_units(basis, driving, order)
    assert to_si(f"2.5 {unit}", unit, "case.toml", "k_ref") == pytest.approx(2.5, rel=1e-12)
    assert "(" not in unit and "**" not in unit


def test_a_k_ref_unit_of_another_order_is_still_refused():
    from tubewright.models.reactions import rate_units

    with pytest.raises(CaseError, match="dimension"):
        to_si("2 m^3/mol/s", rate_units("volume", "concentration", 2.0 + 1e-6), "case.toml", "k_ref")
