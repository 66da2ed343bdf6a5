"""The verbs answer the same from the command line, from a study and from Python (facts of this project)."""

from __future__ import annotations

import json
import os

import pytest
from builders import DEMO
from tubewright.optimizer.cli import main
from tubewright.optimizer.screening.analysis import DEFAULT_SAMPLES
from tubewright.optimizer.study.report import read_store
from tubewright.optimizer.study.runner import run_study
from tubewright.optimizer.study.spec import load_study

import tubewright as tw


def test_public_api_resolves_every_name():
    for name in tw.__all__:
        assert getattr(tw, name) is not None
    with pytest.raises(AttributeError):
        tw.no_such_name  # noqa: B018


def _study(tmp_path, body: str):
    path = tmp_path / "study.toml"
    path.write_text(f'title = "verbs"\nbase = "{DEMO / "oxidation-design.toml"}"\n' + body)
    return path


@pytest.mark.slow
def test_run_and_optimize_give_the_same_design_with_standard_tubes(tmp_path, capsys):
    sets = {"design.inner_diameter": "25 mm", "design.standard_tubes": True}
    set_toml = ", ".join(f'"{k}" = {json.dumps(v)}' for k, v in sets.items())
    study = _study(tmp_path, f'[[task]]\nname = "standard"\nkind = "optimize"\nset = {{ {set_toml} }}\n')
    assert run_study(study, tmp_path / "out", workers=1, progress=False)["done"] == 1
    capsys.readouterr()
    argv = ["optimize", str(DEMO / "oxidation-design.toml"), "--json"]
    for k, v in sets.items():
        argv += ["--set", f"{k}={'true' if v is True else v}"]
    assert main(argv) == 0
    cli = json.loads(capsys.readouterr().out)
    rows, _ = read_store(tmp_path / "out")
    stored = rows[0]["summary"]
    assert cli["standard_tubes"] and stored["standard_tubes"]  # both ranked the tube sizes
    assert [r["label"] for r in stored["standard_tubes"]] == [r["label"] for r in cli["standard_tubes"]]
    assert stored["design"] == pytest.approx(cli["design"], rel=1e-9)
    assert stored["objective"] == pytest.approx(cli["objective"], rel=1e-9)
    best = cli["standard_tubes"][0]  # the optimum is built on the best-ranked tube, not the case's own diameter
    assert cli["design"]["inner_diameter_m"] == pytest.approx(best["inner_diameter_m"], rel=1e-9)
    assert cli["objective"] == pytest.approx(best["objective"], rel=1e-3)


def test_screening_defaults_are_the_same_in_a_study_on_the_command_line_and_in_python(tmp_path, monkeypatch):
    seen = []

    def fake_screen(case, method, n, *args, **kwargs):
        seen.append((method, n))
        raise SystemExit(0)  # stop before any computation: only the sample count is checked

    import tubewright.optimizer.screening.screen as screen_module

    monkeypatch.setattr(screen_module, "screen", fake_screen)
    for method in DEFAULT_SAMPLES:
        study = _study(tmp_path, f'[[task]]\nkind = "screen"\nmethod = "{method}"\n')
        (task,) = load_study(study).tasks
        assert task.options["samples"] == DEFAULT_SAMPLES[method]
        with pytest.raises(SystemExit):
            main(["screen", str(DEMO / "oxidation-screen.toml"), "--method", method])
        with pytest.raises(SystemExit):
            tw.screen(tw.load_case(DEMO / "oxidation-screen.toml"), method)
    assert seen == [(m, n) for m, n in DEFAULT_SAMPLES.items() for _ in range(2)]


def test_the_console_command_returns_mains_exit_code_then_freezes_the_collector(monkeypatch):
    # `tubewright` (command.console) runs main() and, only then, moves what is alive out of the garbage
    # collector's reach, so that interpreter exit does not traverse the models built (a fact of this project)
    import gc

    from tubewright.optimizer import cli, command

    calls = []
    monkeypatch.setattr(cli, "main", lambda: calls.append("main") or 3)
    monkeypatch.setattr(gc, "freeze", lambda: calls.append("freeze"))
    monkeypatch.setenv("OMP_NUM_THREADS", "2")  # the user's choice stands
    monkeypatch.delenv("OPENBLAS_NUM_THREADS", raising=False)
    assert command.console() == 3 and calls == ["main", "freeze"]
    assert os.environ["OMP_NUM_THREADS"] == "2" and os.environ["OPENBLAS_NUM_THREADS"] == "1"


def test_the_command_sets_its_thread_defaults_before_numpy_loads():
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", "import sys, tubewright.optimizer.command; "
                          "print(sorted(m for m in ('numpy', 'tubewright.optimizer.cli') if m in sys.modules))"],
                         capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_simulate_hands_over_the_profiles_before_the_checks_and_answers_the_same():
    from tubewright.models import load_case
    from tubewright.optimizer import verbs

    case = load_case(DEMO / "oxidation.toml")
    seen = []
    result = verbs.simulate(case, on_profiles=lambda r: seen.append((r, len(r.findings), "checks_s" in r.timings)))
    assert seen == [(result, 0, False)] and result.findings  # before the checks, which then ran
    plain = verbs.simulate(case)
    assert [f.as_dict() for f in result.findings] == [f.as_dict() for f in plain.findings]
    assert result.summary == plain.summary
