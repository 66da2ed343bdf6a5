"""A memo on disk of the conversions that models.units computed with pint, so that a case whose quantities
were all read before loads without importing pint (its import and registry cost 0.1-0.17 s of every process
that loads a case: simulate, optimize, screen, fit and every input error).

An entry maps (the quantity's text exactly as written, the SI unit asked for, whether a lone degree is a
temperature difference) to the float that the parser returned, every check passed. Only accepted
quantities are kept: every refusal comes from the parser itself, every time, with its own message. The
stored float is pint's own answer, so a case read through the memo is the identical case.

One file per software combination, named after FORMAT, the Python version, the installed pint's version
(read from the name of its ``dist-info`` folder, without importing pint) and a CRC-32 of units.py and this
file: an edit of the parser (in an editable install too) or another pint never reads entries of the old
one. No installed pint found that way (an unusual layout): no memo, pint as always.

Where: ``$TUBEWRIGHT_QUANTITY_CACHE`` when set (``off`` turns the memo off), else
``$XDG_CACHE_HOME/tubewright/quantities`` or ``~/.cache/tubewright/quantities`` (``tubewright.cache_dirs``).
A process that converted new quantities writes them when the interpreter exits: merged with the file as it
is then (other processes may have written meanwhile), the newest ``LIMIT`` entries kept, written to a
temporary file and renamed. A file that cannot be read is ignored (and replaced at the next write); a file
that cannot be written costs later processes pint's import and is reported in one line on stderr at exit.
Creating a new file removes the files of all but the ``KEEP_OTHER`` most recently written other
combinations. Entries are ``marshal`` data, trusted as much as the installed code (as ``__pycache__``).
"""

from __future__ import annotations

import atexit
import marshal
import os
import re
import sys
import zlib
from pathlib import Path

from tubewright.cache_dirs import all_but_newest, cache_root, write_atomically

FORMAT = 1  # raise when the record layout changes
LIMIT = 5000  # entries kept (a study's swept values add a few each); the file stays under 0.5 MB
KEEP_OTHER = 3  # files of other software combinations kept when a new one is created
VARIABLE = "TUBEWRIGHT_QUANTITY_CACHE"
_SOURCES = ("units.py", "quantity_memo.py")
_FILE_NAME = re.compile(r"v\d+-py\d+-pint[\w.+!-]*-[0-9a-f]{8}\.memo")
_DIST_INFO = re.compile(r"pint-([^-]+)\.dist-info", re.IGNORECASE)

# "path": Path | None, "entries": {key: float}, "new": {key: float}, "problems": [str], "at_exit": save once registered
_state: dict = {}


def lookup(text: str, unit: str, difference: bool) -> float | None:
    """The float stored for this quantity, or None."""
    return _entries().get((text, unit, difference))


def remember(text: str, unit: str, difference: bool, value: float) -> None:
    """Keep an accepted conversion; it is written when the interpreter exits."""
    if _path() is None:
        return
    key = (text, unit, difference)
    _entries()[key] = value
    _state["new"][key] = value
    if not _state["at_exit"]:
        _state["at_exit"] = atexit.register(save)


def save() -> None:
    """Write the new entries (at exit; callable earlier, then writes only what is new since)."""
    path, new = _path(), _state.get("new")
    if path is None or not new:
        return
    merged = {key: value for key, value in _read(path).items() if key not in new}
    merged.update(new)
    if len(merged) > LIMIT:  # the newest are last: dicts keep the order of insertion
        merged = dict(list(merged.items())[-LIMIT:])
    try:
        fresh = not path.exists()
        path.parent.mkdir(parents=True, exist_ok=True)
        write_atomically(path, marshal.dumps((FORMAT, path.name, merged)))
        if fresh:
            _prune_others(path)
    except OSError as exc:
        problem = f"the quantity memo {path} was not written ({exc}); later runs import pint (set {VARIABLE}=off)"
        _state["problems"].append(problem)
        print(f"tubewright: note: {problem}", file=sys.stderr)
    _state["new"] = {}


def summary() -> dict:
    """Where the memo is, how many entries it holds, how many this process added, and any problem."""
    path = _path()
    return {"file": None if path is None else str(path), "entries": len(_entries()), "new": len(_state["new"]),
            "problems": list(_state["problems"])}


def _entries() -> dict:
    if "entries" not in _state:
        path = _path()
        _state["entries"] = {} if path is None else _read(path)
    return _state["entries"]


def _path() -> Path | None:
    if "path" not in _state:
        _state.update(new={}, problems=[], at_exit=None)
        root = cache_root("quantities", VARIABLE)
        version = _pint_version() if root is not None else None
        _state["path"] = None if version is None else root / _file_name(version)
    return _state["path"]


def _file_name(pint_version: str) -> str:
    here = Path(__file__).resolve().parent
    crc = 0
    for name in _SOURCES:
        crc = zlib.crc32((here / name).read_bytes(), crc)
    return f"v{FORMAT}-py{sys.version_info[0]}{sys.version_info[1]}-pint{pint_version}-{crc:08x}.memo"


def _pint_version() -> str | None:
    """The version in the name of the one ``pint-<version>.dist-info`` folder beside the pint that an import
    would find, or None."""
    from importlib.machinery import PathFinder

    spec = PathFinder.find_spec("pint")
    if spec is None or not spec.submodule_search_locations:
        return None
    folder = Path(next(iter(spec.submodule_search_locations))).parent
    try:
        versions = [m.group(1) for m in map(_DIST_INFO.fullmatch, os.listdir(folder)) if m]
    except OSError:
        return None
    return versions[0] if len(versions) == 1 else None


def _read(path: Path) -> dict:
    """The entries of the file (floats only), or {} when it is missing or not one of ours."""
    try:
        stored_format, name, entries = marshal.loads(path.read_bytes())
    except (OSError, EOFError, ValueError, TypeError):
        return {}
    if stored_format != FORMAT or name != path.name or type(entries) is not dict:
        return {}
    return {key: value for key, value in entries.items() if type(value) is float}


def _prune_others(path: Path) -> None:
    others = [p for p in path.parent.iterdir() if p != path and _FILE_NAME.fullmatch(p.name)]
    for old in all_but_newest(others, KEEP_OTHER):
        old.unlink()
