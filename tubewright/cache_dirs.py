"""Where tubewright's caches on disk live: one rule for all of them.

A cache named ``kind`` lives in ``$XDG_CACHE_HOME/tubewright/<kind>`` or ``~/.cache/tubewright/<kind>``;
its own environment variable, when set, names another folder instead, or turns the cache off with ``off``
(or ``0``, ``no``, ``false``, an empty value). Without a home directory (a service account) there is no
cache. A cache is never needed for a right answer: deleting its folder is always safe.

Caches are shared by parallel processes: a file is written whole under a temporary name and renamed into
place (``write_atomically``), and a cache that starts a new software version's files removes those of all but
the most recently written older versions (``all_but_newest``)."""

from __future__ import annotations

import os
from pathlib import Path

OFF = ("", "off", "0", "no", "false")


def cache_root(kind: str, variable: str) -> Path | None:
    """The folder of the cache ``kind``, or None when ``$variable`` turns it off or there is no home."""
    setting = os.environ.get(variable)
    if setting is not None:
        if setting.strip().lower() in OFF:
            return None
        return Path(setting).expanduser()
    base = os.environ.get("XDG_CACHE_HOME")
    if not base:
        try:
            base = str(Path.home() / ".cache")
        except (RuntimeError, KeyError):
            return None
    return Path(base) / "tubewright" / kind


TEMPORARY_PREFIX = ".tmp-"  # the name of a file being written; a reader never opens one


def write_atomically(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder renamed over it: a reader in
    another process sees the old file or the new one, never a part. Raises OSError."""
    import tempfile  # only when a cache writes: most processes only read

    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=TEMPORARY_PREFIX)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        os.unlink(tmp)
        raise


def all_but_newest(paths, keep: int) -> list:
    """The paths beyond the ``keep`` most recently written (what a cache removes of older versions)."""
    return sorted(paths, key=lambda p: p.stat().st_mtime, reverse=True)[keep:]
