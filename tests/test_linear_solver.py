"""IPOPT's linear-solver options from [numerics]: the MUMPS ordering (measured in
tests/benchmarks/bench_linear_solver.py) and the refusal of orderings this MUMPS build lacks."""

import pytest
from builders import DEMO
from tubewright.models import CaseError, load_case
from tubewright.optimizer.design.problem import DesignProblem


def test_ordering_is_mumps_choice_unless_given():
    case = load_case(DEMO / "oxidation-design.toml")
    assert DesignProblem(case, nfe=120).mumps_ordering() == 7  # IPOPT's default: MUMPS's automatic choice
    given = load_case(DEMO / "oxidation-design.toml", {"numerics.mumps_pivot_order": 0})
    assert DesignProblem(given, nfe=120).mumps_ordering() == 0


@pytest.mark.parametrize("order", [1, 3, 5, 8])
def test_orderings_this_mumps_lacks_are_refused(order):
    with pytest.raises(CaseError, match="mumps_pivot_order"):
        load_case(DEMO / "oxidation-design.toml", {"numerics.mumps_pivot_order": order})
