"""IPOPT's linear-solver options from [numerics]: the MUMPS settings chosen with
tests/benchmarks/bench_linear_solver.py, the user's choices passed through, and the refusal of settings this
MUMPS build lacks."""

import pytest
from builders import DEMO, logsdon_biegler_data
from tubewright.models import CaseError, load_case
from tubewright.models.casefile import build_case
from tubewright.optimizer.design.ideal import free_temperature_profile
from tubewright.optimizer.design.problem import DesignProblem


def test_defaults_avoid_the_automatic_permutation():
    opts = DesignProblem(load_case(DEMO / "oxidation-design.toml"), nfe=120).linear_solver_options()
    assert opts["mumps_pivot_order"] == 7  # MUMPS's automatic ordering
    assert opts["mumps_permuting_scaling"] == 0  # the automatic permutation with scaling fails on large meshes


def test_given_settings_are_passed_to_ipopt():
    given = load_case(DEMO / "oxidation-design.toml", {"numerics.mumps_pivot_order": 0, "numerics.mumps_scaling": 8,
                                                       "numerics.mumps_permuting_scaling": 7})
    opts = DesignProblem(given, nfe=120).linear_solver_options()
    assert (opts["mumps_pivot_order"], opts["mumps_scaling"], opts["mumps_permuting_scaling"]) == (0, 8, 7)


@pytest.mark.parametrize("key,value", [("mumps_pivot_order", 1), ("mumps_pivot_order", 3), ("mumps_pivot_order", 5),
                                       ("mumps_scaling", 3), ("mumps_permuting_scaling", 2), ("mumps_scaling", 78)])
def test_settings_this_mumps_lacks_are_refused(key, value):
    with pytest.raises(CaseError, match=key):
        load_case(DEMO / "oxidation-design.toml", {f"numerics.{key}": value})


@pytest.mark.slow
def test_fine_mesh_profile_problem_solves():
    """At 400 elements IPOPT's default MUMPS settings stopped after one iteration ("restoration failed",
    measured). Logsdon and Biegler (1989): the optimal temperature profile gives a yield of B of 0.610775
    (published optimum, value from memory; the 40-element check is in tests/test_optimize.py)."""
    p = DesignProblem(build_case(logsdon_biegler_data(400), "a-b-c"))
    p.build(modify=free_temperature_profile(p))
    out = p.solve_nlp()
    assert out.success, out.message
    assert out.objective == pytest.approx(0.610775, abs=1e-4)
