"""Every class of bad input gives one clear error naming the file and key, and the CLI exits with code 2."""

import copy
import subprocess
import sys

import pytest
from builders import DEMO, liquid_case
from tubewright.models import CaseError, load_case
from tubewright.models.casefile import build_case
from tubewright.optimizer.cli import main


def _error(data) -> CaseError:
    with pytest.raises(CaseError) as info:
        build_case(data, "bad.toml")
    return info.value


def test_missing_key():
    data = liquid_case(**{"tube.length": None})
    err = _error(data)
    assert err.source == "bad.toml" and err.key == "tube.length" and "missing" in str(err)


def test_misspelled_key_suggests_the_near_match():
    data = liquid_case(**{"tube.length": None, "tube.lenght": "3 m"})
    err = _error(data)
    assert "tube.lenght" in str(err) or "tube.length" in str(err)
    assert 'did you mean "length"' in str(err) or 'found "lenght"' in str(err)


def test_unknown_section_suggests():
    data = liquid_case(**{"coolent": {"mode": "adiabatic"}})
    err = _error(data)
    assert 'did you mean "coolant"' in str(err)


def test_wrong_dimension():
    err = _error(liquid_case(**{"tube.length": "6 kg"}))
    assert err.key == "tube.length" and "dimension" in str(err) and "[length]" in str(err)


@pytest.mark.parametrize("value", ["-2 m", "0 m"])
def test_negative_or_zero_size(value):
    err = _error(liquid_case(**{"tube.inner_diameter": value}))
    assert err.key == "tube.inner_diameter" and "greater than zero" in str(err)


def test_unknown_species_in_reaction():
    data = liquid_case()
    data["chemistry"]["reactions"]["r1"]["equation"] = "A -> Dd"
    err = _error(data)
    assert err.key == "chemistry.reactions.r1.equation" and 'unknown species "Dd"' in str(err)
    assert 'did you mean "D"' in str(err)


def test_reaction_whose_elements_do_not_balance():
    data = liquid_case()
    species = data["chemistry"]["species"]
    species["A"]["formula"], species["D"]["formula"] = "C2H4", "C2H4O"
    species["A"]["molar_mass"] = species["D"]["molar_mass"] = "28 g/mol"
    err = _error(data)
    assert "does not balance" in str(err) and "element O" in str(err)


def test_reaction_that_does_not_conserve_mass():
    data = liquid_case(**{"chemistry.species.D.molar_mass": "150 g/mol"})
    assert "does not conserve mass" in str(_error(data))


def test_order_for_absent_species():
    data = liquid_case()
    data["chemistry"]["reactions"]["r1"]["orders"] = {"A": 1, "Q": 1}
    err = _error(data)
    assert err.key == "chemistry.reactions.r1.orders.Q" and "not in [chemistry.species]" in str(err)


def test_nonphysical_cp_range():
    data = liquid_case()
    data["chemistry"]["species"]["A"]["cp"] = {"nasa7": {"low": [-5, 0, 0, 0, 0, 0, 0], "high": [3, 0, 0, 0, 0, 0, 0]}}
    err = _error(data)
    assert err.key == "chemistry.species.A.cp" and "non-physical" in str(err)


def test_rate_constant_with_wrong_units_names_the_units():
    data = liquid_case()
    data["chemistry"]["reactions"]["r1"]["k_ref"] = "0.01 m^3/mol/s"
    err = _error(data)
    assert err.key == "chemistry.reactions.r1.k_ref" and "1 / [time]" in str(err)


def test_bad_choice_lists_the_allowed():
    err = _error(liquid_case(**{"coolant.mode": "boiling"}))
    assert '"boiling_water"' in str(err) and "allowed" in str(err)


def test_mole_fractions_must_sum_to_one():
    data = liquid_case(**{"feed.molar_flows": None, "feed.molar_flow": "1 mol/s",
                          "feed.composition": {"A": 0.5, "S": 0.4}})
    assert "sum to 0.9" in str(_error(data))


def test_include_and_override(tmp_path):
    base = DEMO / "oxidation.toml"
    top = tmp_path / "variant.toml"
    top.write_text(f'include = "{base}"\n[tube]\nlength = "6 m"\n')
    case = load_case(top, {"tube.count": 3000})
    assert case.tube.length == 6.0 and case.tube.count == 3000 and case.feed.temperature == 590.0
    with pytest.raises(CaseError, match="tube.cuont"):
        load_case(top, {"tube.cuont": 3000})


def test_include_cycle(tmp_path):
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text('include = "b.toml"\n')
    b.write_text('include = "a.toml"\n')
    with pytest.raises(CaseError, match="cycle"):
        load_case(a)


def test_cli_exit_code_2_and_no_traceback(tmp_path):
    bad = tmp_path / "bad.toml"
    text = (DEMO / "oxidation.toml").read_text().replace('length = "5.0 m"', 'length = "6 kg"')
    bad.write_text(text)
    proc = subprocess.run([sys.executable, "-m", "tubewright.optimizer.cli", "simulate", str(bad)], capture_output=True,
                          text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert str(bad) in proc.stderr and "tube.length" in proc.stderr
    assert proc.stderr.count("\n") == 1  # one clear line


def test_cli_missing_file_exit_2(capsys):
    assert main(["simulate", "no-such-case.toml"]) == 2
    assert "file not found" in capsys.readouterr().err


def test_case_data_not_mutated_by_build():
    data = liquid_case()
    before = copy.deepcopy(data)
    build_case(data, "x.toml")
    assert data == before
