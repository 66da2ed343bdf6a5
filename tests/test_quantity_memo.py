"""The memo on disk of converted quantities (models.quantity_memo): a case read before loads without pint and
is the identical case; refusals are never remembered; the file is keyed, merged, trimmed, pruned and written
safely. Facts about this project itself (no outside source needed)."""

from __future__ import annotations

import marshal
import os
import shutil
import subprocess
import sys

import pytest
from builders import DEMO, ROOT
from tubewright.models import quantity_memo as memo
from tubewright.models.errors import CaseError
from tubewright.models.units import to_si, to_si_one_of

LOAD = ("import hashlib, sys\n"
        "from tubewright.models.casefile import load_case\n"
        "from tubewright.models.errors import CaseError\n"
        "try:\n"
        "    case = load_case({path!r}, {overrides!r})\n"
        "    print(hashlib.sha256(repr(case).encode()).hexdigest(), 'pint' in sys.modules)\n"
        "except CaseError as err:\n"
        "    print('refused', err, 'pint' in sys.modules)\n")


def _load(tmp_path, overrides=None, setting=None, path=DEMO / "oxidation-design.toml"):
    """Load a case in a fresh process with the memo in tmp_path (or ``setting``): (its printed line, stderr)."""
    env = dict(os.environ, TUBEWRIGHT_QUANTITY_CACHE=setting or str(tmp_path))
    done = subprocess.run([sys.executable, "-c", LOAD.format(path=str(path), overrides=overrides or {})],
                          capture_output=True, text=True, env=env, cwd=ROOT / "tests", check=True)
    return done.stdout.strip(), done.stderr


def test_a_case_read_before_loads_without_pint_and_is_the_same_case(tmp_path):
    first, _ = _load(tmp_path)
    again, _ = _load(tmp_path)
    without, _ = _load(tmp_path, setting="off")
    digest = without.split()[0]
    assert first == f"{digest} True"  # pint converted every quantity and the memo kept them
    assert again == f"{digest} False"  # the same case (every float's repr equal), pint never imported
    assert without == f"{digest} True"
    # a mass-rate duty: the molar try that pint refuses is not needed once the mass rate is remembered
    mass_duty = {"limits.production_rate": "8000 t/year"}
    first, _ = _load(tmp_path, mass_duty)
    again, _ = _load(tmp_path, mass_duty)
    assert first.split()[1] == "True" and again == f"{first.split()[0]} False"


def test_refusals_are_never_remembered_and_say_the_same_every_time(tmp_path):
    _load(tmp_path)
    for value in ("hot", "300 parsec", "300 kg"):  # no number, an unknown unit, a wrong dimension
        overrides = {"limits.max_temperature": value}
        first, _ = _load(tmp_path, overrides)
        again, _ = _load(tmp_path, overrides)
        assert first.startswith("refused") and "limits.max_temperature" in first
        assert first == again
    entries = _file_entries(tmp_path)
    assert entries and not any(text in ("hot", "300 parsec", "300 kg") for text, _, _ in entries)
    # a refusal the text itself shows needs no pint at all
    assert _load(tmp_path, {"limits.max_temperature": "hot"})[0].endswith("False")


def _file_entries(folder) -> dict:
    (path,) = [p for p in folder.iterdir() if p.suffix == ".memo"]
    stored_format, name, entries = marshal.loads(path.read_bytes())
    assert (stored_format, name) == (memo.FORMAT, path.name)
    return entries


@pytest.fixture
def fresh(tmp_path, monkeypatch):
    """The memo module with empty state, its file in tmp_path."""
    monkeypatch.setenv(memo.VARIABLE, str(tmp_path))
    monkeypatch.setattr(memo, "_state", {})
    return tmp_path


def test_entries_are_written_merged_with_other_processes_and_the_newest_kept(fresh, monkeypatch):
    memo.remember("1 m", "m", False, 1.0)
    memo.remember("20 degC", "K", False, 293.15)
    memo.save()
    assert _file_entries(fresh) == {("1 m", "m", False): 1.0, ("20 degC", "K", False): 293.15}
    monkeypatch.setattr(memo, "_state", {})  # another process, started now
    assert memo.lookup("20 degC", "K", False) == 293.15 and memo.lookup("20 degC", "K", True) is None
    first_process = dict(memo._state)
    monkeypatch.setattr(memo, "_state", {})  # a third process writes meanwhile
    memo.remember("2 bar", "Pa", False, 2e5)
    memo.save()
    monkeypatch.setattr(memo, "_state", first_process)
    memo.remember("5 mm", "m", False, 0.005)
    memo.save()
    assert set(_file_entries(fresh)) == {("1 m", "m", False), ("20 degC", "K", False), ("2 bar", "Pa", False),
                                         ("5 mm", "m", False)}
    monkeypatch.setattr(memo, "LIMIT", 2)
    memo.remember("7 s", "s", False, 7.0)
    memo.save()
    assert list(_file_entries(fresh)) == [("5 mm", "m", False), ("7 s", "s", False)]  # the newest two
    assert memo.summary()["new"] == 0 and memo.summary()["problems"] == []


def test_an_unreadable_file_is_ignored_and_replaced(fresh, monkeypatch):
    memo.remember("1 m", "m", False, 1.0)
    memo.save()
    (path,) = fresh.glob("*.memo")
    for damage in (b"not marshal data", marshal.dumps((memo.FORMAT, "another.memo", {("1 m", "m", False): 9.0})),
                   marshal.dumps((memo.FORMAT, path.name, {("1 m", "m", False): "9"}))):
        path.write_bytes(damage)
        monkeypatch.setattr(memo, "_state", {})
        assert memo.lookup("1 m", "m", False) is None  # not ours, or not a float: pint converts it again
        assert to_si("1 m", "m", "case.toml", "tube.length") == 1.0
    memo.remember("3 m", "m", False, 3.0)
    memo.save()
    assert _file_entries(fresh) == {("3 m", "m", False): 3.0}


def test_a_folder_that_cannot_be_written_is_reported_not_raised(fresh, monkeypatch, capsys):
    blocker = fresh / "file"
    blocker.write_text("a file where the folder should be")
    monkeypatch.setenv(memo.VARIABLE, str(blocker / "memo"))
    memo.remember("1 m", "m", False, 1.0)
    memo.save()
    problems = memo.summary()["problems"]
    assert len(problems) == 1 and str(blocker) in problems[0]
    assert "quantity memo" in capsys.readouterr().err
    assert memo.lookup("1 m", "m", False) == 1.0  # this process keeps what it converted


@pytest.mark.parametrize("off", ["off", "", "0", "no", "False"])
def test_the_memo_can_be_turned_off(fresh, monkeypatch, off):
    monkeypatch.setenv(memo.VARIABLE, off)
    memo.remember("1 m", "m", False, 1.0)
    memo.save()
    assert memo.summary()["file"] is None and memo.lookup("1 m", "m", False) is None
    assert not list(fresh.iterdir())


def test_the_file_is_named_after_pint_and_the_parser_source(tmp_path, monkeypatch):
    name = memo._file_name("0.25.3")
    assert name.startswith(f"v{memo.FORMAT}-py{sys.version_info[0]}{sys.version_info[1]}-pint0.25.3-")
    assert memo._FILE_NAME.fullmatch(name) and memo._file_name("0.26") != name
    for source in memo._SOURCES:  # a copy of the sources: an edit of either changes the name
        shutil.copy(ROOT / "models" / source, tmp_path / source)
    monkeypatch.setattr(memo, "__file__", str(tmp_path / "quantity_memo.py"))
    assert memo._file_name("0.25.3") == name
    with open(tmp_path / "units.py", "a") as fh:
        fh.write("# an edit\n")
    assert memo._file_name("0.25.3") != name
    import pint

    assert memo._pint_version() == pint.__version__  # read without importing pint, from its dist-info


def test_a_new_file_removes_all_but_the_newest_other_files(fresh):
    others = [f"v{memo.FORMAT}-py39-pint0.{k}-0000000{k}.memo" for k in range(6)]
    for k, name in enumerate(others):
        (fresh / name).write_bytes(b"")
        os.utime(fresh / name, (1e9 + k, 1e9 + k))
    (fresh / "notes.txt").write_text("not ours")
    memo.remember("1 m", "m", False, 1.0)
    memo.save()
    left = {p.name for p in fresh.iterdir()}
    assert left == {*others[-memo.KEEP_OTHER:], "notes.txt", memo._path().name}


def test_one_of_several_units_takes_the_one_that_fits(fresh):
    assert to_si_one_of("3.6 kg/h", ("mol/s", "kg/s"), "case.toml", "limits.production_rate") == ("kg/s", 0.001)
    assert to_si_one_of("2 mol/s", ("mol/s", "kg/s"), "case.toml", "limits.production_rate") == ("mol/s", 2.0)
    with pytest.raises(CaseError, match="limits.production_rate"):
        to_si_one_of("2 m", ("mol/s", "kg/s"), "case.toml", "limits.production_rate")
    assert memo.lookup("3.6 kg/h", "kg/s", False) == 0.001  # found under its unit: no molar try next time
