"""Overnight studies: expansion and bad input, failure isolation, resume after SIGKILL, Dask on loopback,
the HTML report."""

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from html.parser import HTMLParser
from pathlib import Path

import pytest
from builders import DEMO
from tubewright.models import CaseError
from tubewright.optimizer.cli import main
from tubewright.optimizer.study.report import report, status
from tubewright.optimizer.study.runner import run_study
from tubewright.optimizer.study.spec import load_study

ROOT = Path(__file__).resolve().parents[1]


def write_study(tmp_path, body: str, name="study.toml") -> Path:
    path = tmp_path / name
    path.write_text(f'title = "test study"\nbase = "{DEMO / "oxidation.toml"}"\n' + body)
    return path


SWEEP = """
[[task]]
name = "nominal"
kind = "simulate"

[[task]]
name = "coolant"
kind = "sweep"
grid = { "coolant.pressure" = ["100 bar", "103 bar", "106 bar", "108 bar", "110 bar", "111 bar"] }
"""


def results(folder):
    conn = sqlite3.connect(Path(folder) / "results.sqlite")
    rows = conn.execute("SELECT task_id, status, summary_json FROM tasks ORDER BY task_id").fetchall()
    conn.close()
    return [(tid, st, json.loads(s) if s else None) for tid, st, s in rows]


def test_expansion_identity_and_shared_computation(tmp_path):
    study = load_study(write_study(tmp_path, SWEEP))
    assert len(study.tasks) == 7
    ids = [t.task_id for t in study.tasks]
    assert ids[0] == ids[5] and len(set(ids)) == 6  # the 110 bar point is the nominal case: one identity
    again = load_study(write_study(tmp_path, SWEEP))
    assert [t.task_id for t in again.tasks] == ids  # stable


@pytest.mark.parametrize("body, key, message", [
    ('[[task]]\nkind = "simulate"\ncase = "missing.toml"\n', "task[0].case", "not found"),
    ('[[task]]\nkind = "simulate"\nset = { "tube.lenght" = "4 m" }\n', "task[0].set", "tube.lenght"),
    ('[[task]]\nkind = "sweep"\ngrid = { "coolant.mode" = ["constant", "adiabatic"] }\n', "task[0].grid.coolant.mode",
     "numbers or quantities"),
    ('title = "x"\n', "task", "no tasks"),
    ('[[task]]\nkind = "simulat"\n', "task[0].kind", 'did you mean "simulate"'),
])
def test_bad_study_files(tmp_path, body, key, message):
    path = tmp_path / "bad.toml"
    path.write_text(f'base = "{DEMO / "oxidation.toml"}"\n' + body if not body.startswith("title") else body)
    with pytest.raises(CaseError) as info:
        load_study(path)
    assert info.value.key == key and message in str(info.value) and str(path) in str(info.value)


def test_folder_of_another_study_is_refused_and_left_alone(tmp_path, capsys):
    a = write_study(tmp_path, '[[task]]\nkind = "simulate"\n', "a.toml")
    b = write_study(tmp_path, '[[task]]\nkind = "simulate"\n', "b.toml")
    folder = tmp_path / "results"
    run_study(a, folder, progress=False)
    before = (folder / "results.sqlite").read_bytes()
    assert main(["run", str(b), "--out", str(folder)]) == 2
    assert "belongs to another study" in capsys.readouterr().err
    assert (folder / "results.sqlite").read_bytes() == before


def test_failures_are_recorded_and_the_batch_goes_on(tmp_path):
    body = """
[[task]]
name = "first"
kind = "simulate"
set = { "tube.length" = "4 m" }

[[task]]
name = "too slow"
kind = "optimize"
case = "%s"
timeout = "0.05 s"

[[task]]
name = "runaway"
kind = "simulate"
set = { "coolant.pressure" = "140 bar" }

[[task]]
name = "last"
kind = "simulate"
""" % (DEMO / "oxidation-design.toml")
    path = write_study(tmp_path, body)
    summary = run_study(path, tmp_path / "r", workers=1, progress=False)
    st = {t["name"]: t for t in status(tmp_path / "r")["tasks"]}
    assert st["first"]["status"] == "done" and st["last"]["status"] == "done"
    assert st["too slow"]["status"] == "timeout" and "time limit" in st["too slow"]["reason"]
    assert st["runaway"]["status"] == "stopped" and "ceiling" in st["runaway"]["reason"]
    assert summary["not_done"] == 2
    # --retry-failed runs only those again
    again = run_study(path, tmp_path / "r", workers=1, retry_failed=True, progress=False)
    assert again["ran"] == 2


LONG_SWEEP = SWEEP + ('\n[[task]]\nname = "longer"\nkind = "sweep"\ngrid = { "coolant.pressure" = ['
                      + ", ".join(f'"{100.05 + 0.1 * i:.2f} bar"' for i in range(30)) + "] }\n")


def test_resume_after_sigkill_matches_an_uninterrupted_run(tmp_path):
    path = write_study(tmp_path, LONG_SWEEP)  # enough tasks that the kill lands mid-way
    cmd = [sys.executable, "-m", "tubewright.optimizer.cli", "run", str(path), "--workers", "1",
           "--out", str(tmp_path / "killed")]
    proc = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    db = tmp_path / "killed" / "results.sqlite"
    deadline = time.time() + 120
    done = 0
    while time.time() < deadline and done < 2:
        time.sleep(0.1)
        if db.exists():
            try:
                conn = sqlite3.connect(db)
                done = conn.execute("SELECT COUNT(*) FROM tasks WHERE status = 'done'").fetchone()[0]
                conn.close()
            except sqlite3.OperationalError:
                pass
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    partial = [r for r in results(tmp_path / "killed") if r[1] == "done"]
    assert 2 <= len(partial) < 36  # killed mid-way
    run_study(path, tmp_path / "killed", workers=1, progress=False)
    run_study(path, tmp_path / "clean", workers=2, progress=False)
    killed, clean = results(tmp_path / "killed"), results(tmp_path / "clean")
    assert [r[0] for r in killed] == [r[0] for r in clean]
    assert all(r[1] == "done" for r in killed)
    assert [r[2] for r in killed] == [r[2] for r in clean]


def test_dask_cluster_on_loopback_gives_the_local_results(tmp_path):
    distributed = pytest.importorskip("distributed")
    path = write_study(tmp_path, SWEEP)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        run_study(path, tmp_path / "dask", scheduler=cluster.scheduler_address, progress=False)
    run_study(path, tmp_path / "local", workers=2, progress=False)
    a, b = results(tmp_path / "dask"), results(tmp_path / "local")
    assert [r[:2] for r in a] == [r[:2] for r in b] and all(r[1] == "done" for r in a)
    assert [r[2] for r in a] == [r[2] for r in b]


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.rows, self.charts, self.stack = 0, 0, []

    def handle_starttag(self, tag, attrs):
        if tag not in ("img", "meta", "br"):
            self.stack.append(tag)
        if tag == "tr":
            self.rows += 1
        if tag == "svg":
            self.charts += 1

    def handle_endtag(self, tag):
        assert self.stack and self.stack[-1] == tag, f"unbalanced </{tag}>"
        self.stack.pop()


def test_report_is_valid_html_with_charts_and_every_task(tmp_path):
    path = write_study(tmp_path, SWEEP)
    run_study(path, tmp_path / "r", workers=2, progress=False)
    files = report(tmp_path / "r")
    page = Path(files["report_html"]).read_text()
    parser = _Collector()
    parser.feed(page)
    assert not parser.stack
    assert parser.rows == 1 + 7  # header + every study entry
    assert parser.charts >= 1 and "Screening estimate only" in page
    assert "http://" not in page and "https://" not in page  # opens offline
    assert main(["status", str(tmp_path / "r")]) == 0


def test_report_charts_come_from_the_summaries_without_pandas_pyarrow_or_matplotlib(tmp_path, monkeypatch):
    body = f"""
[[task]]
name = "cheapest"
kind = "optimize"
case = "{DEMO / "oxidation-design.toml"}"

[[task]]
name = "front"
kind = "pareto"
case = "{DEMO / "oxidation-design.toml"}"
points = 2
"""
    run_study(write_study(tmp_path, body), tmp_path / "r", workers=2, progress=False)
    import pyarrow.parquet as pq
    from tubewright.optimizer.study import report as report_module

    rows, _ = report_module.read_store(tmp_path / "r")
    for row, key, table in ((rows[0], "figure_profile", "profiles"), (rows[1], "front", "front")):
        stored = pq.read_table(tmp_path / "r" / row["tables"][table]).to_pydict()
        assert row["summary"][key] == {name: stored[name] for name in row["summary"][key]}
    code = ("import sys; from tubewright.optimizer.cli import main; main(['report', sys.argv[1]]); "
            "print(sorted(m for m in ('pandas', 'pyarrow', 'matplotlib', 'pint') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code, str(tmp_path / "r")], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().endswith("[]")
    page = (tmp_path / "r" / "report.html").read_text()
    assert "Optimum: cheapest" in page and "Pareto front: front" in page

    real = report_module.read_store

    def without_figure_data(folder):  # a folder written before the summaries carried the charts' data
        rows, meta = real(folder)
        for row in rows:
            row["summary"].pop("figure_profile", None), row["summary"].pop("front", None)
        return rows, meta

    monkeypatch.setattr(report_module, "read_store", without_figure_data)
    report(tmp_path / "r", tmp_path / "from-parquet.html")
    assert (tmp_path / "from-parquet.html").read_text() == page


def test_swept_values_on_a_report_axis():
    from tubewright.optimizer.study.report import _axis_values

    assert _axis_values(["100 bar", "102.5 bar"]) == ([100.0, 102.5], "bar")  # as written, no pint
    assert _axis_values([3600, 4400]) == ([3600.0, 4400.0], "")
    xs, unit = _axis_values(["1 bar", "150 kPa"])  # 1 bar = 100 kPa (SI definition)
    assert unit == "bar" and xs == pytest.approx([1.0, 1.5], rel=1e-12)
    xs, unit = _axis_values(["100 bar", 3600])  # not one kind of quantity: the numbers, no unit
    assert xs == [100.0, 3600.0] and unit == ""
    assert _axis_values(["9**9**9 m", "1 m"]) == ([9.0, 1.0], "")  # refused by the quantity parser, never evaluated
