"""Fixtures shared by the tests (the builders live in builders.py)."""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile

import pytest
from builders import DEMO

# The tests never write to the user's form cache: one empty directory per test session (child processes
# inherit it), removed at exit.
_FORM_CACHE = tempfile.mkdtemp(prefix="tubewright-forms-")
os.environ["TUBEWRIGHT_FORM_CACHE"] = _FORM_CACHE
atexit.register(shutil.rmtree, _FORM_CACHE, True)


@pytest.fixture
def demo_dir():
    return DEMO
