"""A cache on disk of the bridge's compiled forms, so that differentiating and compiling a form is done once
per machine, not once per process.

A form is the printed text of a constraint body with numbered placeholders (see bridge); what the bridge
derives from it (the derivative code, the Hessian pairs, the constant gradient entries and the byte code of
both functions) depends only on that text, on the code that derives it and on the Python and Pyomo that
run it. An entry is therefore keyed by the SHA-256 of the text and its placeholder counts, inside a
directory named after the Python version, the Pyomo version and the SHA-256 of the bridge's own source files
(bridge.py, pyomo_rules.py and this file): a changed bridge, even in an editable install without a new
version number, never reads an entry an older one wrote. Every entry also holds its full text, compared on
reading.

Where: ``$TUBEWRIGHT_FORM_CACHE`` when set (``off`` or an empty value turns the cache off), else
``$XDG_CACHE_HOME/tubewright/forms`` or ``~/.cache/tubewright/forms`` (``tubewright.cache_dirs``). Entries
are written atomically (a temporary file renamed), so parallel workers may share the directory. A directory
that cannot be written, or an unreadable entry, never stops a solve: the form is compiled as without the cache
and the problem is counted in ``CompiledNLP.times["form_cache"]``.

Entries are Python ``marshal`` data, like the interpreter's own ``__pycache__``: the directory is trusted
as much as the installed code is.

Every new software version (and, in an editable install, every edit of the bridge) starts a directory of
its own; the first compilation that creates one removes the entries of all but the ``KEEP_OTHER`` most
recently written other directories (only names of this cache's making: software tags, entry keys,
temporary files), so the cache does not grow with every upgrade. A removed directory that another
installation still uses costs it one compilation without the cache.
"""

from __future__ import annotations

import hashlib
import marshal
import re
import sys
from pathlib import Path

from tubewright.cache_dirs import TEMPORARY_PREFIX, all_but_newest, cache_root, write_atomically

FORMAT = 1  # raise when the record layout below changes
_SOURCES = ("bridge.py", "pyomo_rules.py", "form_cache.py")
KEEP_OTHER = 3  # directories of other software versions kept when a new one is created
_TAG_NAME = re.compile(r"v\d+-py\d+-pyomo[\w.+-]*-[0-9a-f]{16}")
_ENTRY_NAME = re.compile(rf"[0-9a-f]{{64}}|{re.escape(TEMPORARY_PREFIX)}\w+")


def cache_directory() -> Path | None:
    """The directory of this software's entries, or None when the cache is off."""
    root = cache_root("forms", "TUBEWRIGHT_FORM_CACHE")
    return None if root is None else root / _software_tag()


_TAG: list = []


def _software_tag() -> str:
    if not _TAG:
        import pyomo.version

        digest = hashlib.sha256()
        here = Path(__file__).resolve().parent
        for name in _SOURCES:
            digest.update((here / name).read_bytes())
        _TAG.append(f"v{FORMAT}-py{sys.version_info[0]}{sys.version_info[1]}-pyomo{pyomo.version.version}-"
                    f"{digest.hexdigest()[:16]}")
    return _TAG[0]


def _key(text: str, nx: int, npar: int) -> str:
    return hashlib.sha256(f"{nx}\n{npar}\n{text}".encode()).hexdigest()


class FormCache:
    """Reads and writes the entries of one compilation; counts hits, writes and problems."""

    def __init__(self):
        self.directory = cache_directory()
        self.hits = 0
        self.written = 0
        self.problems: list[str] = []
        self._writable = True  # until a write fails: then one problem is recorded, not one per form
        self._ready = False  # the directory exists (checked at the first write)

    def get(self, text: str, nx: int, npar: int):
        """The record written for this form, or None: (value code, derivatives code, n_grad, pairs,
        constant_gradient)."""
        if self.directory is None:
            return None
        path = self.directory / _key(text, nx, npar)
        try:
            data = path.read_bytes()
        except (FileNotFoundError, NotADirectoryError):
            return None
        except OSError as exc:
            self.problems.append(f"reading {path}: {exc}")
            return None
        try:
            record = marshal.loads(data)
            stored_format, stored_text, stored_nx, stored_npar, *payload = record
        except (EOFError, ValueError, TypeError) as exc:
            self.problems.append(f"unreadable entry {path} ({exc}): compiled anew")
            return None
        if (stored_format, stored_text, stored_nx, stored_npar) != (FORMAT, text, nx, npar):
            self.problems.append(f"entry {path} holds another form: compiled anew")
            return None
        self.hits += 1
        return payload

    def put(self, text: str, nx: int, npar: int, value_code, derivatives_code, n_grad: int, pairs: list,
            constant_gradient: list) -> None:
        if self.directory is None or not self._writable:
            return
        record = (FORMAT, text, nx, npar, value_code, derivatives_code, n_grad, [tuple(p) for p in pairs],
                  list(constant_gradient))
        try:
            if not self._ready:  # checked at the first write; a new directory prunes the older ones
                if not self.directory.is_dir():
                    self.directory.mkdir(parents=True, exist_ok=True)
                    self._prune_others()
                self._ready = True
            write_atomically(self.directory / _key(text, nx, npar), marshal.dumps(record))
        except OSError as exc:
            self.problems.append(f"writing to {self.directory}: {exc}; nothing more written by this compilation")
            self._writable = False
            return
        self.written += 1

    def _prune_others(self) -> None:
        """Remove the entries (and then the directory, if empty) of the other software directories beside
        this one, all but the KEEP_OTHER most recently written; a problem is recorded, never raised."""
        try:
            others = [d for d in self.directory.parent.iterdir()
                      if d != self.directory and d.is_dir() and _TAG_NAME.fullmatch(d.name)]
            for old in all_but_newest(others, KEEP_OTHER):
                for entry in old.iterdir():
                    if entry.is_file() and _ENTRY_NAME.fullmatch(entry.name):
                        entry.unlink()
                if not any(old.iterdir()):
                    old.rmdir()
        except OSError as exc:
            self.problems.append(f"removing older software directories beside {self.directory}: {exc}")

    def summary(self) -> dict:
        return {"directory": None if self.directory is None else str(self.directory), "hits": self.hits,
                "written": self.written, "problems": self.problems}
