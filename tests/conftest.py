"""Fixtures shared by the tests (the builders live in builders.py)."""

from __future__ import annotations

import pytest
from builders import DEMO


@pytest.fixture
def demo_dir():
    return DEMO
