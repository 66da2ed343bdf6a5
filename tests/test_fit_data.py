"""Laboratory runs for a fit (optimizer.fitting.data): headers with units, measured quantities, and the
refusals that name the file, the row and the column."""

import pytest
from builders import DEMO
from tubewright.models import CaseError
from tubewright.optimizer.fitting.data import read_runs

CASE = DEMO / "oxidation.toml"


def write(tmp_path, text, name="runs.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_runs_are_read_in_si_with_their_cases(tmp_path):
    path = write(tmp_path, "feed.temperature [degC],tube.length [mm],measured.conversion,"
                           "measured.outlet_temperature [degC],measured.outlet_flow.C3H4O [mol/h]\n"
                           "316.85,2500,0.42,330,3600\n326.85,3000,0.55,341.5,7200\n")
    runs = read_runs(path, CASE)
    assert [r.row for r in runs] == [1, 2]
    assert runs[0].case.feed.temperature == pytest.approx(590.0)  # 316.85 degC, an absolute temperature
    assert runs[1].case.tube.length == pytest.approx(3.0)
    assert runs[0].measured == pytest.approx({"conversion": 0.42, "outlet_temperature": 603.15,
                                              "outlet_flow.C3H4O": 1.0})
    assert runs[1].measured["outlet_flow.C3H4O"] == pytest.approx(2.0)


def test_formation_rates_are_read_in_the_basis_of_their_reactions(tmp_path):
    # the demo's reactions are per catalyst mass: a rate in mmol/(g h) is read as mol/(kg s)
    path = write(tmp_path, "feed.temperature [K],measured.rate.C3H6 [mmol/g/h]\n590,-3.6\n")
    assert read_runs(path, CASE)[0].measured["rate.C3H6"] == pytest.approx(-1e-3)


def test_parquet_files_are_read(tmp_path):
    import pandas as pd

    path = tmp_path / "runs.parquet"
    pd.DataFrame({"feed.temperature [K]": [590.0], "measured.conversion": [0.4]}).to_parquet(path)
    assert read_runs(path, CASE)[0].measured == {"conversion": 0.4}


@pytest.mark.parametrize("text,column,message", [
    ("feed.temperatur [K],measured.conversion\n590,0.4\n", "feed.temperatur", "temperatur"),
    ("feed.temperature,measured.conversion\n590,0.4\n", "feed.temperature", "unit"),
    ("feed.temperature [K],measured.conversion\n590,nan\n", "measured.conversion", "finite"),
    ("feed.temperature [K],measured.conversion\n590,abc\n", "measured.conversion", "not a number"),
    ("feed.temperature [K],measured.conversion\n590,\n", "measured.conversion", "empty"),
    ("feed.temperature [K],measured.outlet_flow.XYZ [mol/s]\n590,1\n", "measured.outlet_flow.XYZ", "species"),
    ("feed.temperature [K],measured.outlet_temperature\n590,600\n", "measured.outlet_temperature", "unit"),
    ("feed.temperature [K],measured.selectivity\n590,0.9\n", "measured.selectivity", "unknown measured"),
    ("feed.temperature [K],measured.conversion [K]\n590,0.9\n", "measured.conversion", "dimensionless"),
    ("feed.temperature [kg],measured.conversion\n590,0.4\n", "feed.temperature", ""),
    ("feed.temperature [K],measured.rate.C3H6 [mol/m^3/s]\n590,-0.1\n", "measured.rate.C3H6", "dimension"),
    ("feed.temperature [K],measured.rate.N2 [mol/kg/s]\n590,0.0\n", "measured.rate.N2", "no reaction"),
])
def test_bad_data_names_file_row_and_column(tmp_path, text, column, message):
    path = write(tmp_path, text)
    with pytest.raises(CaseError) as info:
        read_runs(path, CASE)
    text_of_error = str(info.value)
    assert str(path) in text_of_error and "row 1" in text_of_error and column in text_of_error
    assert message in text_of_error


def test_every_bad_row_is_listed(tmp_path):
    path = write(tmp_path, "feed.temperature [K],measured.conversion\n590,0.4\n590,inf\n-5,0.3\n")
    with pytest.raises(CaseError, match="2 rows are not acceptable") as info:
        read_runs(path, CASE)
    assert "row 2" in str(info.value) and "row 3" in str(info.value) and "row 1" not in str(info.value)


@pytest.mark.parametrize("text,message", [
    ("feed.temperature [K]\n590\n", "no measured column"),
    ("feed.temperature [K],measured.conversion\n", "no runs"),
    ("feed.temperature [K],feed.temperature [K],measured.conversion\n590,590,0.3\n", "twice"),
])
def test_files_without_usable_runs_are_refused(tmp_path, text, message):
    with pytest.raises(CaseError, match=message):
        read_runs(write(tmp_path, text), CASE)


def test_missing_file_is_named(tmp_path):
    with pytest.raises(CaseError, match="does not exist"):
        read_runs(tmp_path / "nothing.csv", CASE)
