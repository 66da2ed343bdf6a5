"""Property test (hypothesis): any mutation of a demo case is refused with the file and the key named, or
runs to finite numbers whose mass and energy close, within a time budget and without a traceback. The
seed corpus is small for CI; tests/benchmarks/fuzz_cases.py runs hundreds of mutations."""

from __future__ import annotations

import random

import pytest
from case_mutations import DEMOS, demo_data, judge, mutate, time_limit

hypothesis = pytest.importorskip("hypothesis")
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

BUDGET_S = 30.0


@pytest.mark.slow
@settings(max_examples=40, deadline=None, derandomize=True)
@given(demo=st.sampled_from(DEMOS), seed=st.integers(0, 2**32 - 1))
def test_a_mutated_case_is_refused_or_runs_to_finite_closed_numbers(demo, seed):
    data, what = mutate(demo_data(demo), random.Random(seed))
    with time_limit(BUDGET_S):
        outcome = judge(data)
    assert outcome in ("refused", "ran"), what
