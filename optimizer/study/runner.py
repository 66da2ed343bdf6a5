"""Running a study unattended: local worker processes (default) or a Dask cluster; one transaction per
finished task; failures and time-outs recorded, never fatal; resume by re-running."""

from __future__ import annotations

import contextlib
import ctypes
import errno
import signal
import sqlite3
import sys
import threading
import time
from collections import deque
from multiprocessing.connection import wait as wait_ready
from pathlib import Path

from tubewright.models.errors import ComputationFailed
from tubewright.models.outcomes import RETRYABLE, Reason, Status
from tubewright.optimizer.output.progress import ProgressBar
from tubewright.optimizer.processes import process_context
from tubewright.optimizer.study.lock import folder_lock
from tubewright.optimizer.study.spec import MAX_TASKS, load_study
from tubewright.optimizer.study.store import Store
from tubewright.optimizer.study.tasks import execute, execute_limited, failure


def _die_with_parent():
    """Linux: the kernel kills this worker when the coordinator dies (prctl PR_SET_PDEATHSIG), so a killed
    run leaves no worker computing on. Elsewhere the coordinator's own clean-up has to do."""
    if sys.platform.startswith("linux"):
        try:
            ctypes.CDLL(None, use_errno=True).prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
        except (OSError, AttributeError):
            pass


PR_SET_PDEATHSIG = 1


def _child(spec, conn):
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the coordinator's to handle: it ends the workers
    _die_with_parent()
    try:
        conn.send(execute(spec))
    finally:
        conn.close()


def _end(running):
    """Kill the workers still running (on an interruption or an error of the coordinator)."""
    for proc, *_ in running:
        if proc.is_alive():
            proc.kill()
    for proc, *_ in running:
        proc.join(timeout=5)


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
    with _interrupt_flag() as interrupted:
        try:
            _loop(ctx, pending, running, workers, on_done, poll, interrupted)
        finally:
            _end(running)


@contextlib.contextmanager
def _interrupt_flag():
    """Ctrl-C sets a flag that the loop checks at every turn (at least every ``poll`` seconds), which then
    raises KeyboardInterrupt. The handler itself does not raise: an exception raised where the signal
    lands could land inside the interpreter's fork hooks while a worker is started, which print it as
    "Exception ignored in ... _releaseLock" with a traceback and swallow it. A second Ctrl-C raises at once
    (the loop may be busy recording a result). Only the main thread can install a signal handler;
    elsewhere the flag stays unset."""
    flag = {"set": False}
    if threading.current_thread() is not threading.main_thread():
        yield flag
        return

    def on_sigint(signum, frame):
        if flag["set"]:
            raise KeyboardInterrupt
        flag["set"] = True

    previous = signal.signal(signal.SIGINT, on_sigint)
    try:
        yield flag
    finally:
        signal.signal(signal.SIGINT, previous)


def _loop(ctx, pending, running, workers, on_done, poll, interrupted=None):
    while pending or running:
        if interrupted is not None and interrupted["set"]:
            raise KeyboardInterrupt
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
        running[:] = still


def run_dask(tasks, address: str, on_done):
    """Submit every task to a running Dask scheduler. A task with a time limit runs in its own process on
    its worker, and the limit counts from the task's own start there (study.tasks.execute_limited): a
    result does not depend on the queue, and a task past its limit is stopped on its worker."""
    from distributed import Client, as_completed

    client = Client(address, timeout="20s")
    try:
        futures = {}
        for task in tasks:
            key = f"tubewright-{task.task_id}-{time.time_ns()}"
            if task.timeout is None:  # no limit: no process of its own (that costs its imports, about 1 s)
                fut = client.submit(execute, task.spec(), key=key, pure=False)
            else:
                fut = client.submit(execute_limited, task.spec(), task.timeout, key=key, pure=False)
            futures[fut] = (task, time.time())
        for fut in as_completed(list(futures)):
            task, submitted = futures.pop(fut)
            try:
                result = fut.result()
            except Exception as err:  # a lost worker or a pickling problem: recorded, not fatal
                result = failure(Status.ERROR, Reason.WORKER_LOST, f"Dask: {err!r}")
            on_done(task, result, submitted)
    finally:
        client.close()


def run_study(study_path, folder=None, workers: int = 1, scheduler: str | None = None, retry_failed: bool = False,
              progress: bool = True, max_tasks: int = MAX_TASKS) -> dict:
    """Expand the study (validating every task first), hold the folder's lock, skip what is done, run the
    rest, record each task. ``not_done`` counts every task of the study that is not done, those skipped
    because they failed earlier included."""
    study = load_study(study_path, max_tasks=max_tasks)
    folder = Path(folder) if folder else study.path.with_suffix(".results")
    store = Store(folder)
    if store.db_path.exists():
        store.check_owner()  # before the lock: another program's folder gets no file of ours
    with folder_lock(folder):
        try:
            return _run_locked(study, folder, workers, scheduler, retry_failed, progress)
        except (OSError, sqlite3.OperationalError) as err:
            if not is_disk_full(err):
                raise
            raise DiskFull(f"no space left (or the disk refused the write) while writing {folder}: nothing "
                           "already recorded is lost; free space and run again to resume") from err


def _run_locked(study, folder, workers, scheduler, retry_failed, progress) -> dict:
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
    log.write(f"{_now()} run: {len(todo)} tasks to run, {len(unique) - len(todo)} already recorded, "
              f"workers={workers}, scheduler={scheduler}\n")
    log.flush()
    counts = {"done": 0, "not_done": 0}
    bar(0, len(todo), 0)

    def on_done(task, result, started):
        store.record(task, result, started)
        ok = result["status"] == Status.DONE
        counts["done" if ok else "not_done"] += 1
        log.write(f"{_now()} {task.task_id} {result['status']:<8} {result.get('seconds') or 0:8.2f} s  "
                  f"{task.name}: {result.get('reason', '')}\n")
        log.flush()
        bar(counts["done"] + counts["not_done"], len(todo), counts["not_done"])

    interrupted = False
    try:
        if scheduler:
            run_dask(todo, scheduler, on_done)
        else:
            run_local(todo, max(1, workers), on_done)
    except KeyboardInterrupt:
        interrupted = True
        log.write(f"{_now()} interrupted: {len(todo) - counts['done'] - counts['not_done']} tasks not finished "
                  "(recorded as interrupted; run again to resume)\n")
        now = store.statuses()  # one query, not one per task
        store.mark_unfinished([t for t in todo if now.get(t.task_id) == Status.PENDING],
                              Status.INTERRUPTED, Reason.INTERRUPTED, "interrupted (Ctrl-C or SIGINT): run again")
    except (OSError, sqlite3.OperationalError) as err:
        if is_disk_full(err):
            log_disk_full(log, err)
        raise
    finally:
        bar.close()
        log.close()
        store.close()
    return {"study": str(study.path), "folder": str(folder), "tasks": len(unique), "entries": len(study.tasks),
            "ran": len(todo), "done": counts["done"],
            "not_done": counts["not_done"] + len(skipped_failed) + (len(todo) - counts["done"] - counts["not_done"]),
            "skipped_failed": len(skipped_failed), "interrupted": interrupted,
            "seconds": time.perf_counter() - t0}


def is_disk_full(err) -> bool:
    """No space (or no quota, or past the file-size limit) while writing: the OS error number, or SQLite's
    SQLITE_FULL result code."""
    if isinstance(err, sqlite3.OperationalError):  # SQLite reports a refused write (EFBIG) as an I/O error
        return (getattr(err, "sqlite_errorcode", 0) & 0xFF) in (SQLITE_FULL, SQLITE_IOERR)
    return err.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)


SQLITE_IOERR, SQLITE_FULL = 10, 13


class DiskFull(ComputationFailed):
    def __init__(self, message):
        super().__init__(Reason.DISK_FULL, message)


def log_disk_full(log, err):
    try:
        log.write(f"{_now()} no space left on the device ({err}); stopped\n")
        log.flush()
    except OSError:
        pass  # the log is on the same full disk


def _now() -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S")
