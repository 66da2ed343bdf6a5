"""The robust design (optimizer.design.robust): every limit held in K scenarios with a shared design, checked
against the analytic first-order plug-flow length (Levenspiel 1999, ch. 5: L = -ln(1 - X*) u / k), the
nominal problem reproduced by K = 1 at the nominal scenario, the measured probability of passing against
the scenario-approach bound (Campi and Garatti 2008, Theorem 1), and the refusals."""

import json
import math

import numpy as np
import pytest
from builders import DEMO, liquid_case, make
from tubewright.models import CaseError, load_case
from tubewright.optimizer.design.optimise import optimise
from tubewright.optimizer.design.robust import draw_scenarios, robust_design, scenario_guarantee

K_PATH = "chemistry.reactions.r1.k_ref"
U = 1e-5 / (math.pi / 4 * 0.02**2)  # m/s: 0.010 kg/s of liquid at 1000 kg/m^3 in a 20 mm tube
X_MIN = 0.9


def uncertain_k_case(lo="0.006 1/s", hi="0.014 1/s"):
    return make(liquid_case(**{
        "design": {"length": {"min": "1 m", "max": "200 m"}}, "limits": {"min_conversion": X_MIN},
        "goal": {"objective": "min_volume"}, "numerics.finite_elements": 20,
        "uncertain": {"k": {"parameter": K_PATH, "distribution": "uniform", "min": lo, "max": hi}}}))


def length_for(k):
    return -math.log(1 - X_MIN) * U / k


def test_robust_length_is_the_analytic_length_of_the_slowest_scenario():
    case = uncertain_k_case()
    nominal = optimise(case)
    _, scenarios = draw_scenarios(case, 8, seed=3)
    robust = optimise(case, scenarios=scenarios)
    slowest = min([0.01] + [s[K_PATH] for s in scenarios])  # the nominal case is kept too
    assert nominal.design["length_m"] == pytest.approx(length_for(0.01), rel=1e-4)
    assert robust.design["length_m"] == pytest.approx(length_for(slowest), rel=1e-4)
    rows = robust.extras["scenario_limits"]
    binding = [r["scenario"] for r in rows if r["limits"][0]["binding"]]
    assert binding == [1 + [s[K_PATH] for s in scenarios].index(slowest)]  # only the slowest binds


def test_one_scenario_at_the_nominal_values_reproduces_optimize():
    case = load_case(DEMO / "oxidation-design.toml")
    plain = optimise(case)
    same = optimise(case, scenarios=[{K_PATH.replace("r1", "partial_oxidation"): case.reactions[0].k_ref}])
    assert same.objective == pytest.approx(plain.objective, rel=1e-7)
    assert same.design == pytest.approx(plain.design, rel=1e-6)


def test_the_guarantee_is_the_binomial_tail():
    # Campi and Garatti (2008): sum_{i<d} C(K,i) eps^i (1-eps)^(K-i) = beta at the reported eps
    from scipy.stats import binom

    g = scenario_guarantee(30, 3, beta=0.01)
    assert binom.cdf(2, 30, g["epsilon"]) == pytest.approx(0.01, rel=1e-9)
    assert scenario_guarantee(2, 3)["epsilon"] is None


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_measured_probability_is_at_least_the_scenario_bound(seed):
    # one decision variable, uniform k: the robust design passes wherever k >= the slowest scenario's k
    case = uncertain_k_case()
    out = robust_design(case, 9, seed=seed, samples=400)
    robust = out["verification"]["robust"]
    assert robust["probability"] >= out["guarantee"]["pass_probability_at_least"]
    assert robust["probability"] > out["verification"]["nominal"]["probability"]
    slowest = min([0.01] + [s["parameters"][K_PATH] for s in out["scenario_limits"]])
    analytic = (0.014 - slowest) / 0.008
    low, high = robust["interval_95"]
    assert low - 0.02 <= analytic <= high + 0.02  # the exact probability inside the binomial interval (+-2 %)


@pytest.mark.slow
def test_demo_robust_design_passes_at_least_the_bound_over_seeds(tmp_path, capsys):
    from tubewright.optimizer.cli import main

    for seed in (0, 1):
        assert main(["optimize", str(DEMO / "oxidation-design.toml"), "--scenarios", "8", "--seed", str(seed),
                     "--verify-samples", "200", "--json", "--out", str(tmp_path / f"s{seed}")]) == 0
        answer = json.loads(capsys.readouterr().out)
        r = answer["robust"]
        assert r["verification"]["robust"]["probability"] >= r["guarantee"]["pass_probability_at_least"]
        assert r["price"] >= -1e-6 * abs(answer["objective"])  # robustness costs something, never gains
        assert (tmp_path / f"s{seed}" / "robust.png").stat().st_size > 0


def test_a_design_quantity_cannot_vary_by_scenario():
    with pytest.raises(CaseError, match="design quantity"):
        draw_scenarios(load_case(DEMO / "oxidation-screen.toml"), 4, 0)


def test_scenarios_follow_their_distributions():
    # scrambled Sobol points through the inverse CDF: K = 256 scenarios of U(0.006, 0.014) have mean 0.01
    _, scenarios = draw_scenarios(uncertain_k_case(), 256, seed=0)
    k = np.array([s[K_PATH] for s in scenarios])
    assert k.min() >= 0.006 and k.max() <= 0.014
    assert k.mean() == pytest.approx(0.010, rel=2e-3)


def test_a_robust_study_task_records_the_robust_design(tmp_path):
    import sqlite3

    from tubewright.optimizer.output.casewriter import toml_text
    from tubewright.optimizer.study.runner import run_study

    study = tmp_path / "s.toml"
    case = tmp_path / "c.toml"
    case.write_text(toml_text(liquid_case(**{
        "design": {"length": {"min": "1 m", "max": "200 m"}}, "limits": {"min_conversion": X_MIN},
        "goal": {"objective": "min_volume"}, "numerics.finite_elements": 20,
        "uncertain": {"k": {"parameter": K_PATH, "distribution": "uniform", "min": "0.006 1/s",
                            "max": "0.014 1/s"}}})))
    study.write_text(f'title = "robust"\nbase = "{case}"\n[[task]]\nkind = "robust"\nscenarios = 4\n'
                     "verify_samples = 50\n")
    summary = run_study(study, tmp_path / "out", progress=False)
    assert summary["done"] == 1
    conn = sqlite3.connect(tmp_path / "out" / "results.sqlite")
    reason, summary_json = conn.execute("SELECT reason, summary_json FROM tasks").fetchone()
    conn.close()
    assert "robust design over 4 scenarios" in reason
    robust = json.loads(summary_json)["robust"]
    verified = robust["verification"]["robust"]
    assert verified["samples"] == 50 and "hot_spot_samples_K" not in verified  # those went to a table
    assert list((tmp_path / "out" / "tables").glob("*hot_spots_robust.parquet"))


def test_expected_goal_is_the_mean_of_the_simulated_scenarios():
    # [robust] goal = "expected": the objective is the mean goal over the nominal case and the scenarios;
    # checked against the adaptive integrator: the robust design simulated in each scenario, its goal averaged
    # (for A -> D the yield of D is the conversion of A)
    from tubewright.models.parameters import apply
    from tubewright.models.simulator import simulate
    from tubewright.optimizer.design.problem import design_case
    from tubewright.optimizer.design.robust import read_robust

    case = make(liquid_case(**{
        "design": {"length": {"min": "1 m", "max": "30 m"}}, "limits": {"min_conversion": 0.5},
        "goal": {"objective": "max_yield"}, "numerics.finite_elements": 20,
        "uncertain": {"k": {"parameter": K_PATH, "distribution": "uniform", "min": "0.006 1/s", "max": "0.014 1/s"}},
        "robust": {"scenarios": 4, "goal": "expected"}}))
    settings = read_robust(case)
    assert settings == {"scenarios": 4, "seed": 0, "goal": "expected", "verify_samples": 1000}
    _, scenarios = draw_scenarios(case, 4, 0)
    res = optimise(case, scenarios=scenarios, scenario_goal="expected")
    values = {"length": res.design["length_m"]}
    conversions = [simulate(design_case(c, values), checks=False).summary["conversion"]
                   for c in [case, *(apply(case, s) for s in scenarios)]]
    assert res.objective == pytest.approx(np.mean(conversions), rel=1e-5)
    mixed = optimise(case, scenarios=scenarios, scenario_goal=("mix", 0.25))  # the same design (L at its bound)
    assert mixed.objective == pytest.approx(0.25 * conversions[0] + 0.75 * np.mean(conversions), rel=1e-5)


def test_robust_section_is_checked():
    for robust, key in (({"goal": "worst"}, "robust.goal"), ({"scenarios": 0}, "robust.scenarios"),
                        ({"scenaros": 4}, "robust.scenaros"), ({"nominal_weight": 0.3}, "robust.nominal_weight"),
                        ({"goal": "mix", "nominal_weight": 1.5}, "robust.nominal_weight")):
        from tubewright.optimizer.design.robust import read_robust

        with pytest.raises(CaseError) as info:
            read_robust(make(liquid_case(robust=robust)))
        assert info.value.key == key


def test_scenario_blocks_compile_once_when_only_parameters_differ():
    # k_ref scenarios reach the model as mutable Params: one scenario block is printed, the others are
    # replicas (same optimum as the analytic test above). An order reaches it as a number: no replicas,
    # the scenarios are printed and solved all the same.
    from tubewright.optimizer.design.problem import DesignProblem

    case = uncertain_k_case()
    _, scenarios = draw_scenarios(case, 4, seed=3)
    p = DesignProblem(case, scenarios=scenarios).build()
    assert p.nlp.times["replicated_blocks"] == 3
    out = p.solve_nlp()
    slowest = min([0.01] + [s[K_PATH] for s in scenarios])
    assert out.success and p.design_values()["length"] == pytest.approx(length_for(slowest), rel=1e-4)
    orders = [{"chemistry.reactions.r1.orders.A": v} for v in (0.9, 1.0, 1.1)]
    q = DesignProblem(case, scenarios=orders).build()
    assert q.nlp.times["replicated_blocks"] == 0 and q.solve_nlp().success
