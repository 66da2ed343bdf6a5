"""Overnight studies that cannot hurt anything: one writer per folder, other programs' files untouched,
read-only status and report, clear messages for corrupt stores, full disks and interruptions (facts of
this project; no outside source)."""

from __future__ import annotations

import hashlib
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from builders import DEMO, ROOT
from tubewright.models import CaseError
from tubewright.optimizer.cli import main
from tubewright.optimizer.study.lock import folder_lock
from tubewright.optimizer.study.report import status
from tubewright.optimizer.study.runner import run_study

SWEEP = '[[task]]\nname = "sweep"\nkind = "sweep"\ngrid = { "coolant.pressure" = ["100 bar", "104 bar"] }\n'


def _study(tmp_path, body=SWEEP):
    path = tmp_path / "study.toml"
    path.write_text(f'title = "safety"\nbase = "{DEMO / "oxidation.toml"}"\n' + body)
    return path


def _digest(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir()) if p.is_file()}


def test_another_programs_database_is_refused_and_left_byte_identical(tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    conn = sqlite3.connect(out / "results.sqlite")
    conn.execute("CREATE TABLE invoices (id INTEGER, amount REAL)")
    conn.execute("INSERT INTO invoices VALUES (1, 9.5)")
    conn.commit()
    conn.close()
    before = _digest(out)
    assert main(["run", str(_study(tmp_path)), "--out", str(out)]) == 2
    assert "not a tubewright results database" in capsys.readouterr().err
    assert main(["status", str(out)]) == 2
    assert _digest(out) == before


def test_a_corrupt_store_is_reported_without_a_traceback(tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    (out / "results.sqlite").write_bytes(b"SQLite format 3\x00" + os.urandom(3000))
    before = _digest(out)
    assert main(["status", str(out)]) == 2
    err = capsys.readouterr().err
    assert "cannot be read" in err or "damaged" in err or "not a tubewright" in err
    assert "Traceback" not in err and _digest(out) == before


def test_status_and_report_do_not_change_the_store(tmp_path):
    out = tmp_path / "out"
    run_study(_study(tmp_path), out, workers=1, progress=False)
    db = out / "results.sqlite"
    before = hashlib.sha256(db.read_bytes()).hexdigest()
    status(out)
    from tubewright.optimizer.study.report import report

    report(out)
    assert hashlib.sha256(db.read_bytes()).hexdigest() == before
    assert not (out / "results.sqlite-wal").exists() or (out / "results.sqlite-wal").stat().st_size == 0


def test_one_writer_per_folder(tmp_path):
    out = tmp_path / "out"
    with folder_lock(out):  # as if another run held the folder
        with pytest.raises(CaseError) as info:
            run_study(_study(tmp_path), out, workers=1, progress=False)
    assert "in use by process" in str(info.value)
    assert run_study(_study(tmp_path), out, workers=1, progress=False)["done"] == 2  # released: runs


def test_two_runs_started_at_once_compute_each_task_once(tmp_path):
    study = _study(tmp_path)
    cmd = [sys.executable, "-m", "tubewright.optimizer.cli", "run", str(study), "--out", str(tmp_path / "out")]
    procs = [subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE) for _ in range(2)]
    codes = sorted(p.wait(timeout=120) for p in procs)
    assert codes in ([0, 0], [0, 2])  # the second waits for nothing: it is refused, or finds all done
    conn = sqlite3.connect(tmp_path / "out" / "results.sqlite")
    attempts = conn.execute("SELECT SUM(attempts) FROM tasks").fetchone()[0]
    conn.close()
    assert attempts == 2  # two tasks, each computed once


def test_a_resume_exits_1_while_earlier_failures_remain(tmp_path):
    body = '[[task]]\nname = "bad"\nkind = "simulate"\nset = { "coolant.pressure" = "140 bar" }\n'
    study = _study(tmp_path, body)
    assert main(["run", str(study), "--out", str(tmp_path / "out")]) == 1  # the runaway stops: not done
    assert main(["run", str(study), "--out", str(tmp_path / "out")]) == 1  # nothing run now, still not done


def test_a_full_disk_is_a_clear_message_and_a_resume_finishes(tmp_path):
    study = _study(tmp_path)
    out = tmp_path / "out"
    code = ("import resource, sys; resource.setrlimit(resource.RLIMIT_FSIZE, (40_000, 40_000)); "
            "from tubewright.optimizer.cli import main; sys.exit(main(sys.argv[1:]))")
    proc = subprocess.run([sys.executable, "-c", code, "run", str(study), "--out", str(out)], cwd=ROOT,
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 1, proc.stderr
    assert "no space left" in proc.stderr and "Traceback" not in proc.stderr
    assert main(["run", str(study), "--out", str(out)]) == 0  # nothing lost: the resume completes


def test_ctrl_c_stops_cleanly_and_is_recorded(tmp_path):
    pressures = ", ".join(f'"{100 + 0.1 * i:.1f} bar"' for i in range(80))  # some 20 s of tasks on one worker
    body = f'[[task]]\nname = "slow"\nkind = "sweep"\ngrid = {{ "coolant.pressure" = [{pressures}] }}\n'
    study = _study(tmp_path, body)
    out = tmp_path / "out"
    # A shell starts background jobs with SIGINT ignored, and the child would inherit that: start it as a
    # terminal user's command is started, with the default SIGINT disposition.
    proc = subprocess.Popen([sys.executable, "-m", "tubewright.optimizer.cli", "run", str(study), "--out", str(out),
                             "--workers", "1"], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    db = out / "results.sqlite"
    deadline = time.time() + 60
    while time.time() < deadline and not db.exists():
        time.sleep(0.05)
    time.sleep(1.5)
    proc.send_signal(signal.SIGINT)
    t0 = time.time()
    stdout, stderr = proc.communicate(timeout=30)
    assert time.time() - t0 < 5.0, (proc.returncode, stderr[-2000:])
    if proc.returncode == 0:
        pytest.skip("the study finished before the interruption arrived")
    assert proc.returncode == 130 and "Traceback" not in stderr, stderr
    assert "interrupted" in (out / "run.log").read_text()
    st = status(out)
    assert any(t["status"] == "interrupted" for t in st["tasks"]) or all(t["status"] == "done" for t in st["tasks"])
    assert main(["run", str(study), "--out", str(out)]) == 0  # the resume finishes the interrupted tasks


def test_user_text_is_plain_in_figures_and_safe_in_csv(tmp_path, capsys):
    nasty = r"$\frac{$ =1+1"
    case = tmp_path / "case.toml"
    case.write_text(f'include = "{DEMO / "oxidation.toml"}"\ntitle = \'{nasty}\'\n')
    assert main(["simulate", str(case), "--out", str(tmp_path / "sim")]) == 0
    assert (tmp_path / "sim" / "profiles.png").stat().st_size > 10_000
    study = tmp_path / "study.toml"
    study.write_text(f'title = \'{nasty}\'\nbase = "{case}"\n[[task]]\nname = "=1+1"\nkind = "sweep"\n'
                     'grid = { "coolant.pressure" = ["100 bar", "104 bar"] }\n')
    out = tmp_path / "out"
    assert main(["run", str(study), "--out", str(out)]) == 0
    assert main(["report", str(out)]) == 0
    text = (out / "tasks.csv").read_text()
    assert "'=1+1" in text and "\n=1+1" not in text and ",=1+1" not in text


def test_json_output_is_one_document_even_when_something_prints(capsys, monkeypatch):
    import json

    import tubewright.optimizer.verbs as verbs

    real = verbs.simulate

    def chatty(case, **options):
        print("WARNING: a library talks on stdout")
        return real(case, **options)

    monkeypatch.setattr(verbs, "simulate", chatty)
    assert main(["simulate", str(DEMO / "oxidation.toml"), "--json"]) == 0
    captured = capsys.readouterr()
    assert json.loads(captured.out)["status"] == "ok"
    assert "a library talks" in captured.err


def test_dry_run_counts_and_a_huge_expansion_is_refused_at_once(tmp_path, capsys):
    assert main(["run", str(_study(tmp_path)), "--dry-run"]) == 0
    assert "2 entries, 2 distinct tasks" in capsys.readouterr().out
    values = ", ".join(f'"{100 + i} bar"' for i in range(200))
    counts = ", ".join(str(1000 + i) for i in range(1000))
    huge = _study(tmp_path, f'[[task]]\nkind = "sweep"\ngrid = {{ "coolant.pressure" = [{values}], '
                  f'"tube.count" = [{counts}] }}\n')
    t0 = time.perf_counter()
    assert main(["run", str(huge), "--dry-run"]) == 2
    assert "expands to 200000 tasks" in capsys.readouterr().err and time.perf_counter() - t0 < 5


def _children(pid: int) -> list[int]:
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            out.append(int(stat.parent.name))
    return out


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="parent-death signal is Linux only")
def test_workers_end_with_a_killed_coordinator(tmp_path):
    body = '[[task]]\nkind = "screen"\nmethod = "sobol"\nsamples = 512\n'
    path = tmp_path / "study.toml"
    path.write_text(f'base = "{DEMO / "oxidation-screen.toml"}"\n' + body)
    proc = subprocess.Popen([sys.executable, "-m", "tubewright.optimizer.cli", "run", str(path), "--out",
                             str(tmp_path / "out")], cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.time() + 60
    workers = []
    while time.time() < deadline and not workers:
        time.sleep(0.1)
        workers = _children(proc.pid)
    assert workers, "no worker started"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    deadline = time.time() + 5
    while time.time() < deadline and any(Path(f"/proc/{w}").exists() and "zombie" not in _state(w) for w in workers):
        time.sleep(0.1)
    assert not any(Path(f"/proc/{w}").exists() and "zombie" not in _state(w) for w in workers)


def _state(pid: int) -> str:
    try:
        return next(line for line in Path(f"/proc/{pid}/status").read_text().splitlines() if line.startswith("State"))
    except (OSError, StopIteration):
        return "zombie"


def test_dask_time_limits_count_running_time_and_stop_the_task(tmp_path):
    """Six tasks of about 1-2 s each queue on one Dask worker thread: queue time does not count against
    their 20 s limit; a task limited to 0.2 s is stopped (its process on the worker is killed)."""
    distributed = pytest.importorskip("distributed")
    values = ", ".join(f'"{100 + i} bar"' for i in range(6))
    body = (f'[[task]]\nname = "queued"\nkind = "sweep"\ntimeout = "20 s"\n'
            f'grid = {{ "coolant.pressure" = [{values}] }}\n'
            '[[task]]\nname = "short"\nkind = "simulate"\ntimeout = "0.2 s"\nset = { "coolant.pressure" = "99 bar" }\n')
    path = _study(tmp_path, body)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        summary = run_study(path, tmp_path / "dask", scheduler=cluster.scheduler_address, progress=False)
    rows = {r["name"]: r for r in status(tmp_path / "dask")["tasks"]}
    assert summary["done"] == 6
    assert rows["short"]["status"] == "timeout" and "stopped on its worker" in rows["short"]["reason"]
    assert all(r["status"] == "done" for name, r in rows.items() if name.startswith("queued"))


def test_a_first_interrupt_only_flags_the_loop_and_a_second_raises_at_once():
    # A Ctrl-C that raised where it landed could land inside the interpreter's fork hooks while a worker is
    # started, which print it with a traceback and swallow it ("Exception ignored in ... _releaseLock",
    # seen in a CI-like run): the first Ctrl-C only sets the runner's flag, which stops the loop before it
    # starts anything more; a second one raises at once.
    from collections import deque

    from tubewright.optimizer.study import runner

    before = signal.getsignal(signal.SIGINT)
    with runner._interrupt_flag() as flag:
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(0.2)  # the handler runs here: it must not raise
        assert flag["set"]
        started = []
        with pytest.raises(KeyboardInterrupt):
            runner._loop(None, deque(["a task"]), [], 1, lambda *a: started.append(a), 0.01, flag)
        assert not started  # nothing more was started
        with pytest.raises(KeyboardInterrupt):
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.2)
    assert signal.getsignal(signal.SIGINT) is before  # the caller's handler is back
