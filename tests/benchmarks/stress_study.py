"""Stress benchmark (a script, not a test): a study of 200 short tasks run under random SIGKILLs of the
coordinator and of its workers, with a task that raises, one that passes its time limit and one that
exhausts a memory limit (RLIMIT_AS in its worker). Every coordinator is started by this script in a
process group of its own. Prints the tasks lost (must be 0), finished tasks computed twice (must be 0),
whether the results equal an uninterrupted run, and the time overhead of the guarantees.

Run: .venv/bin/python tests/benchmarks/stress_study.py [KILLS] [SEED]"""

from __future__ import annotations

import json
import os
import random
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
RAISE_AT, MEMORY_AT = "119.7 bar", "119.8 bar"  # the two sweep points whose tasks misbehave on purpose


def coordinator(study: str, out: str, retry: bool):
    """The coordinator, with the misbehaving tasks wired in (forked workers inherit the wrapper)."""
    import resource

    import numpy as np
    import tubewright.optimizer.study.runner as runner

    real = runner.execute

    def misbehaving(spec):
        pressure = spec["case_data"].get("coolant", {}).get("pressure")
        if pressure == RAISE_AT:
            raise RuntimeError("a task that raises, on purpose")
        if pressure == MEMORY_AT:
            resource.setrlimit(resource.RLIMIT_AS, (1 << 30, 1 << 30))
            np.ones(1 << 31)  # 16 GB: beyond the limit
        return real(spec)

    runner.execute = lambda spec: _isolated(misbehaving, spec)
    summary = runner.run_study(study, out, workers=2, retry_failed=retry, progress=False)
    print(json.dumps({k: summary[k] for k in ("done", "not_done")}))


def _isolated(fn, spec):
    from tubewright.optimizer.study.tasks import failure

    try:
        return fn(spec)
    except Exception as err:  # what execute itself does with an exception: a recorded error
        return failure("error", "exception", f"{type(err).__name__}: {err}")


def write_study(folder: Path) -> Path:
    values = [f"{100 + 0.1 * i:.1f} bar" for i in range(199)]
    grid = ", ".join(f'"{v}"' for v in values)
    path = folder / "stress.toml"
    path.write_text(f'title = "stress"\nbase = "{ROOT / "studies" / "demo" / "oxidation.toml"}"\n'
                    f'[[task]]\nname = "points"\nkind = "sweep"\ngrid = {{ "coolant.pressure" = [{grid}] }}\n'
                    '[[task]]\nname = "too slow"\nkind = "simulate"\ntimeout = "0.001 s"\n'
                    'set = { "tube.length" = "7 m" }\n')
    return path


def _start(study, out, retry=False):
    cmd = [sys.executable, __file__, "--coordinator", str(study), str(out), "1" if retry else "0"]
    return subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
                            start_new_session=True)


def _children(pid):
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            if int(stat.read_text().rsplit(")", 1)[1].split()[1]) == pid:
                out.append(int(stat.parent.name))
        except (OSError, ValueError, IndexError):
            pass
    return out


def rows(out):
    conn = sqlite3.connect(Path(out) / "results.sqlite")
    try:
        return conn.execute("SELECT task_id, status, attempts, summary_json FROM tasks").fetchall()
    finally:
        conn.close()


def main(kills=20, seed=0):
    rng = random.Random(seed)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        study = write_study(tmp)
        t0 = time.perf_counter()
        clean = _start(study, tmp / "clean")
        clean.communicate()
        clean_s = time.perf_counter() - t0
        t0 = time.perf_counter()
        coordinator_kills = worker_kills = 0
        first_done = {}  # task -> its attempt count when first seen done: a later rise is a duplicate

        def snapshot():
            if (tmp / "stressed" / "results.sqlite").exists():
                for task_id, st, attempts, _ in rows(tmp / "stressed"):
                    if st == "done":
                        first_done.setdefault(task_id, attempts)

        for _ in range(kills):
            proc = _start(study, tmp / "stressed")
            time.sleep(rng.uniform(0.4, 1.0))
            workers = _children(proc.pid)
            if workers and rng.random() < 0.5:
                os.kill(rng.choice(workers), signal.SIGKILL)
                worker_kills += 1
                time.sleep(rng.uniform(0.05, 0.3))
            if proc.poll() is None:
                os.killpg(proc.pid, signal.SIGKILL)  # the coordinator and whatever it started
                coordinator_kills += 1
            proc.wait()
            snapshot()
        for retry in (False, True):  # finish, then re-run what the worker kills left failed
            proc = _start(study, tmp / "stressed", retry)
            proc.communicate()
        stressed_s = time.perf_counter() - t0
        final, reference = rows(tmp / "stressed"), rows(tmp / "clean")
        expected = {r[0] for r in reference}
        lost = len(expected - {r[0] for r in final if r[1] not in ("pending", "interrupted")})
        twice = sum(1 for r in final if r[0] in first_done and r[2] > first_done[r[0]])
        same = ({r[0]: (r[1], r[3]) for r in final if r[1] == "done"}
                == {r[0]: (r[1], r[3]) for r in reference if r[1] == "done"})
        statuses = {}
        for r in final:
            statuses[r[1]] = statuses.get(r[1], 0) + 1
        print(f"{len(expected)} tasks, {kills} rounds: {coordinator_kills} coordinator kills, {worker_kills} worker "
              "kills")
        print(f"  tasks lost:                      {lost}")
        print(f"  finished tasks computed twice:   {twice}")
        print(f"  done results equal a clean run:  {same}")
        print(f"  final statuses:                  {statuses}")
        print(f"  clean run {clean_s:.1f} s; stressed runs in all {stressed_s:.1f} s")


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--coordinator":
        coordinator(sys.argv[2], sys.argv[3], sys.argv[4] == "1")
    else:
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 20, int(sys.argv[2]) if len(sys.argv) > 2 else 0)
