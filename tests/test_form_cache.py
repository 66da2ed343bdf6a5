"""The cache on disk of compiled forms: a cold and a warm compilation give the same problem and optimum as
no cache, bit for bit; a damaged, foreign or unwritable entry is counted and compiled anew, never fatal."""

import numpy as np
import pytest

pyo = pytest.importorskip("pyomo.environ")
pytest.importorskip("cyipopt")

from test_bridge import _fd_check, hs71, piecewise_model  # noqa: E402
from tubewright.optimizer.nlp import form_cache  # noqa: E402
from tubewright.optimizer.nlp.bridge import CompiledNLP  # noqa: E402


def _compiled(monkeypatch, where, build=hs71):
    monkeypatch.setenv("TUBEWRIGHT_FORM_CACHE", str(where))
    return CompiledNLP(build())


@pytest.mark.parametrize("build", [hs71, piecewise_model])
def test_cold_and_warm_compilations_equal_no_cache(monkeypatch, tmp_path, build):
    plain = _compiled(monkeypatch, "off", build)
    cold = _compiled(monkeypatch, tmp_path, build)
    warm = _compiled(monkeypatch, tmp_path, build)
    forms = len(plain.forms) + 1  # and the objective
    assert plain.times["form_cache"]["directory"] is None
    assert cold.times["form_cache"]["written"] == forms and cold.times["form_cache"]["hits"] == 0
    assert warm.times["form_cache"]["hits"] == forms and warm.times["form_cache"]["written"] == 0
    for nlp in (cold, warm):
        assert [f.pairs for f in nlp.forms] == [f.pairs for f in plain.forms]
        assert np.array_equal(nlp.hess_rows, plain.hess_rows) and np.array_equal(nlp.jac_cols, plain.jac_cols)
    _fd_check(warm, np.linspace(1.1, 2.9, warm.n))
    outs = [nlp.solve() for nlp in (plain, cold, warm)]
    assert all(o.success for o in outs)
    assert outs[1].x.tolist() == outs[0].x.tolist() == outs[2].x.tolist()  # the same code: the same bits
    assert outs[1].iterations == outs[0].iterations == outs[2].iterations


def _entries(tmp_path):
    return [p for p in tmp_path.rglob("*") if p.is_file()]


def test_damaged_or_foreign_entries_are_counted_and_compiled_anew(monkeypatch, tmp_path):
    _compiled(monkeypatch, tmp_path)
    entries = _entries(tmp_path)
    assert len(entries) == 3  # hs71: three forms (two constraints and the objective)
    entries[0].write_bytes(b"\x00not marshal")
    entries[1].write_bytes(entries[2].read_bytes())  # a well-formed entry of another form under this key
    nlp = _compiled(monkeypatch, tmp_path)
    cache = nlp.times["form_cache"]
    assert cache["hits"] == 1 and cache["written"] == 2
    assert len(cache["problems"]) == 2
    assert any("unreadable entry" in p for p in cache["problems"])
    assert any("holds another form" in p for p in cache["problems"])
    out = nlp.solve()
    assert out.success and out.objective == pytest.approx(17.0140173, rel=1e-7)  # HS71 (Hock-Schittkowski 1981)
    assert _compiled(monkeypatch, tmp_path).times["form_cache"]["hits"] == 3  # rewritten


def test_an_unwritable_directory_never_stops_a_solve(monkeypatch, tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a directory")
    nlp = _compiled(monkeypatch, blocker / "cache")
    cache = nlp.times["form_cache"]
    assert cache["written"] == 0 and len(cache["problems"]) == 1 and "writing to" in cache["problems"][0]
    assert nlp.solve().success


def test_the_directory_names_the_software(monkeypatch, tmp_path):
    monkeypatch.setenv("TUBEWRIGHT_FORM_CACHE", str(tmp_path))
    here = form_cache.cache_directory()
    assert here.parent == tmp_path and here.name.startswith(f"v{form_cache.FORMAT}-py")
    monkeypatch.setattr(form_cache, "_SOURCES", form_cache._SOURCES[:-1])  # other source files: another tag
    monkeypatch.setattr(form_cache, "_TAG", [])
    assert form_cache.cache_directory() != here
    for off in ("off", "", "0"):
        monkeypatch.setenv("TUBEWRIGHT_FORM_CACHE", off)
        assert form_cache.cache_directory() is None
    monkeypatch.delenv("TUBEWRIGHT_FORM_CACHE")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert form_cache.cache_directory().parent == tmp_path / "xdg" / "tubewright" / "forms"
    monkeypatch.delenv("XDG_CACHE_HOME")

    def no_home():
        raise RuntimeError("Could not determine home directory.")

    monkeypatch.setattr(form_cache.Path, "home", staticmethod(no_home))
    assert form_cache.cache_directory() is None  # no home directory: no cache, and no failure


def test_a_new_software_directory_removes_all_but_the_latest_others(monkeypatch, tmp_path):
    # Five other software directories written at different times, a foreign directory and a foreign file
    # inside the oldest: the first compilation of a new version keeps the KEEP_OTHER latest, removes the
    # older ones' entries and the emptied directory, and leaves whatever this cache did not write.
    import os

    root = tmp_path / "forms"
    names = [f"v1-py311-pyomo6.{k}.0-{k:016x}" for k in range(5)]
    for age, name in enumerate(names):
        d = root / name
        d.mkdir(parents=True)
        (d / ("ab" * 32)).write_bytes(b"entry")
        os.utime(d, (1_000_000 - age * 1000, 1_000_000 - age * 1000))  # older down the list
    (root / "notes").mkdir()
    (root / "notes" / ("cd" * 32)).write_bytes(b"not ours")
    oldest_keep = root / names[4] / "README"
    oldest_keep.write_text("a user's file")
    os.utime(root / names[4], (1, 1))
    nlp = _compiled(monkeypatch, root)
    assert nlp.times["form_cache"]["written"] == 3 and not nlp.times["form_cache"]["problems"]
    assert all((root / n / ("ab" * 32)).exists() for n in names[:form_cache.KEEP_OTHER])
    assert not (root / names[3]).exists()  # emptied and removed
    assert not (root / names[4] / ("ab" * 32)).exists() and oldest_keep.exists()  # only our entries removed
    assert (root / "notes" / ("cd" * 32)).exists()
    again = _compiled(monkeypatch, root)  # the directory exists now: nothing more is removed
    assert again.times["form_cache"]["hits"] == 3
    assert all((root / n / ("ab" * 32)).exists() for n in names[:form_cache.KEEP_OTHER])
