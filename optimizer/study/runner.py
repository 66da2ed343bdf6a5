"""Running a study unattended: local worker processes (default) or a Dask cluster; one transaction per
finished task; failures and time-outs recorded, never fatal; resume by re-running."""

from __future__ import annotations

import time
from collections import deque
from multiprocessing.connection import wait as wait_ready

from tubewright.models.outcomes import RETRYABLE, Reason, Status
from tubewright.optimizer.output.progress import ProgressBar
from tubewright.optimizer.processes import process_context
from tubewright.optimizer.study.spec import load_study
from tubewright.optimizer.study.store import Store
from tubewright.optimizer.study.tasks import execute, failure


def _child(spec, conn):
    try:
        conn.send(execute(spec))
    finally:
        conn.close()


PRELOAD = {"simulate": ("tubewright.models.simulator",),
           "optimize": ("tubewright.optimizer.design.optimise", "tubewright.optimizer.design.alternatives",
                        "tubewright.optimizer.design.ideal"),
           "pareto": ("tubewright.optimizer.design.alternatives",),
           "screen": ("tubewright.optimizer.screening.screen",)}


def run_local(tasks, workers: int, on_done, poll: float = 0.05):
    """Each task in its own process (so that a crash or a time-out kills only that task), started by the
    platform's method (optimizer.processes). The modules the tasks need are imported once here, before
    forking, so that no forked task pays for its imports."""
    import importlib

    for kind in {t.kind for t in tasks}:
        for module in PRELOAD.get(kind, ()):
            importlib.import_module(module)
    ctx = process_context()
    pending = deque(tasks)
    running = []
    while pending or running:
        while pending and len(running) < workers:
            task = pending.popleft()
            parent, child = ctx.Pipe(duplex=False)
            proc = ctx.Process(target=_child, args=(task.spec(), child), daemon=True)
            proc.start()
            child.close()
            running.append((proc, parent, task, time.time(), time.perf_counter()))
        wait_ready([r[1] for r in running] + [r[0].sentinel for r in running], timeout=poll)
        still = []
        for proc, conn, task, started, t0 in running:
            if conn.poll():
                try:
                    result = conn.recv()
                except EOFError:
                    result = failure(Status.ERROR, Reason.WORKER_LOST,
                                     f"worker ended without a result (exit code {proc.exitcode})")
                proc.join()
                on_done(task, result, started)
            elif not proc.is_alive():
                on_done(task, failure(Status.ERROR, Reason.WORKER_LOST, f"worker died (exit code {proc.exitcode})",
                                      time.perf_counter() - t0), started)
            elif task.timeout is not None and time.perf_counter() - t0 > task.timeout:
                proc.kill()
                proc.join()
                on_done(task, failure(Status.TIMEOUT, Reason.TIME_LIMIT,
                                      f"exceeded its time limit of {task.timeout:g} s", time.perf_counter() - t0),
                        started)
            else:
                still.append((proc, conn, task, started, t0))
        running = still


def run_dask(tasks, address: str, on_done, poll: float = 0.2):
    """Submit every task to a running Dask scheduler; a task over its time limit is cancelled and recorded."""
    from distributed import Client, wait

    client = Client(address, timeout="20s")
    try:
        futures = {}
        for task in tasks:
            fut = client.submit(execute, task.spec(), key=f"tubewright-{task.task_id}-{time.time_ns()}", pure=False)
            futures[fut] = (task, time.time(), time.perf_counter())
        while futures:
            try:
                wait(list(futures), timeout=poll, return_when="FIRST_COMPLETED")
            except TimeoutError:  # nothing finished within the poll interval: check the time limits
                pass
            for fut in list(futures):
                task, started, t0 = futures[fut]
                if fut.done():
                    try:
                        result = fut.result()
                    except Exception as err:  # a lost worker or a pickling problem: recorded, not fatal
                        result = failure(Status.ERROR, Reason.WORKER_LOST, f"Dask: {err!r}")
                    on_done(task, result, started)
                    del futures[fut]
                elif task.timeout is not None and time.perf_counter() - t0 > task.timeout:
                    fut.cancel()
                    on_done(task, failure(Status.TIMEOUT, Reason.TIME_LIMIT,
                                          f"exceeded its time limit of {task.timeout:g} s"), started)
                    del futures[fut]
    finally:
        client.close()


def run_study(study_path, folder=None, workers: int = 1, scheduler: str | None = None, retry_failed: bool = False,
              progress: bool = True) -> dict:
    """Expand the study (validating every task first), skip what is done, run the rest, record each task."""
    from pathlib import Path

    study = load_study(study_path)
    folder = Path(folder) if folder else study.path.with_suffix(".results")
    store = Store(folder).open(study, create=True)
    store.register(study.tasks)
    known = store.statuses()
    unique = list({t.task_id: t for t in reversed(study.tasks)}.values())[::-1]  # one computation per identity
    todo = [t for t in unique if known.get(t.task_id) != Status.DONE
            and (retry_failed or known.get(t.task_id) not in RETRYABLE)]
    skipped_failed = [t for t in unique if known.get(t.task_id) in RETRYABLE and not retry_failed]
    bar = ProgressBar("tasks", enabled=progress)
    log = open(folder / "run.log", "a", encoding="utf-8")
    t0 = time.perf_counter()
    log.write(f"{time.strftime('%Y-%m-%d %H:%M:%S')} run: {len(todo)} tasks to run, "
              f"{len(unique) - len(todo)} already recorded, workers={workers}, scheduler={scheduler}\n")
    log.flush()
    counts = {"done": 0, "not_done": 0}
    bar(0, len(todo), 0)

    def on_done(task, result, started):
        store.record(task, result, started)
        ok = result["status"] == Status.DONE
        counts["done" if ok else "not_done"] += 1
        log.write(f"{time.strftime('%Y-%m-%d %H:%M:%S')} {task.task_id} {result['status']:<8} "
                  f"{result.get('seconds') or 0:8.2f} s  {task.name}: {result.get('reason', '')}\n")
        log.flush()
        bar(counts["done"] + counts["not_done"], len(todo), counts["not_done"])

    try:
        if scheduler:
            run_dask(todo, scheduler, on_done)
        else:
            run_local(todo, max(1, workers), on_done)
    finally:
        bar.close()
        log.close()
        store.close()
    return {"study": str(study.path), "folder": str(folder), "tasks": len(unique), "entries": len(study.tasks),
            "ran": len(todo),
            "done": counts["done"], "not_done": counts["not_done"], "skipped_failed": len(skipped_failed),
            "seconds": time.perf_counter() - t0}
