"""One writer per study folder: an exclusive OS file lock (``flock``) on ``FOLDER/run.lock``, held for the
whole run. The kernel releases it when the holder exits, however it exits, so a lock left by a killed run
is never stale: the next run takes it over. The file records who holds it, for the message of a second
run. (On platforms without ``fcntl`` the lock is not available and a warning is logged instead.)"""

from __future__ import annotations

import os
import time
from contextlib import contextmanager
from pathlib import Path

from tubewright.models.errors import CaseError

try:
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

LOCK_NAME = "run.lock"


@contextmanager
def folder_lock(folder: Path):
    """Hold the folder's lock, or raise CaseError naming the process that holds it."""
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / LOCK_NAME
    handle = open(path, "a+", encoding="utf-8")
    try:
        if fcntl is not None:
            try:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError as err:
                handle.seek(0)
                holder = handle.read().strip() or "another process"
                raise CaseError(str(folder), "", f"in use by {holder}: one run per study folder; wait for it or "
                                "choose another --out folder") from err
        handle.seek(0)
        handle.truncate()
        handle.write(f"process {os.getpid()} since {time.strftime('%Y-%m-%d %H:%M:%S')}\n")
        handle.flush()
        yield
    finally:
        handle.close()  # closing releases the lock
