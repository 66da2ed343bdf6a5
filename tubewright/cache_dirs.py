"""Where tubewright's caches on disk live: one rule for all of them.

A cache named ``kind`` lives in ``$XDG_CACHE_HOME/tubewright/<kind>`` or ``~/.cache/tubewright/<kind>``;
its own environment variable, when set, names another folder instead, or turns the cache off with ``off``
(or ``0``, ``no``, ``false``, an empty value). Without a home directory (a service account) there is no
cache. A cache is never needed for a right answer: deleting its folder is always safe."""

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
