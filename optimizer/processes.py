"""The multiprocessing start method, chosen per platform (nothing is set globally):

- Linux: ``fork``. A forked worker inherits the modules the coordinator imported, so a study task or a
  screening batch starts in milliseconds; nothing here starts threads before forking.
- macOS and Windows: ``spawn``. Forking is unsafe on macOS (system libraries with threads) and absent on
  Windows; workers then import what they need themselves.
"""

from __future__ import annotations

import multiprocessing
import sys


def start_method() -> str:
    return "fork" if sys.platform.startswith("linux") else "spawn"


def process_context():
    """A multiprocessing context with the start method of this platform."""
    return multiprocessing.get_context(start_method())
