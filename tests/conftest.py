"""Fixtures shared by the tests (the builders live in builders.py)."""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile

import pytest
from builders import DEMO

# The tests never write to the user's caches (compiled forms, converted quantities): one empty directory per
# cache and test session (child processes inherit them), removed at exit.
for _variable, _prefix in (("TUBEWRIGHT_FORM_CACHE", "tubewright-forms-"),
                           ("TUBEWRIGHT_QUANTITY_CACHE", "tubewright-quantities-")):
    os.environ[_variable] = tempfile.mkdtemp(prefix=_prefix)
    atexit.register(shutil.rmtree, os.environ[_variable], True)


@pytest.fixture
def demo_dir():
    return DEMO
