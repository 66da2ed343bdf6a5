"""Screening through the project's own path (sampling, mapping, evaluation, analysis), against analytic
indices, and on the reactor."""

import math

import numpy as np
import pytest

pytest.importorskip("SALib")

from builders import DEMO, liquid_case, make  # noqa: E402
from tubewright.models import CaseError, load_case  # noqa: E402
from tubewright.optimizer.screening.analysis import run  # noqa: E402
from tubewright.optimizer.screening.evaluation import evaluate, function_evaluator  # noqa: E402
from tubewright.optimizer.screening.screen import screen  # noqa: E402
from tubewright.optimizer.screening.uncertain import Uncertain, read_uncertain, salib_problem  # noqa: E402


def uniform(name, lo, hi):
    return Uncertain(name, f"x.{name}", "uniform", {"min": lo, "max": hi}, False, None, 0.0)


def test_sobol_ishigami_against_analytic_indices():
    # Ishigami and Homma (1990), f = sin x1 + a sin^2 x2 + b x3^4 sin x1, x_i ~ U(-pi, pi), a = 7, b = 0.1.
    # Analytic: V1 = (1 + b pi^4/5)^2 / 2, V2 = a^2/8, V13 = b^2 pi^8 (1/18 - 1/50), V = V1 + V2 + V13.
    a, b = 7.0, 0.1
    items = [uniform(n, -math.pi, math.pi) for n in ("x1", "x2", "x3")]

    def ishigami(v):
        x1, x2, x3 = v["x.x1"], v["x.x2"], v["x.x3"]
        return {"y": np.sin(x1) + a * np.sin(x2) ** 2 + b * x3**4 * np.sin(x1)}

    res = run(items, function_evaluator(items, ishigami), "sobol", 4096, seed=0)
    v1, v2 = 0.5 * (1 + b * math.pi**4 / 5) ** 2, a**2 / 8
    v13 = b**2 * math.pi**8 * (1 / 18 - 1 / 50)
    v = v1 + v2 + v13
    idx = res.indices["y"]
    assert idx["S1"].to_numpy() == pytest.approx([v1 / v, v2 / v, 0.0], abs=0.03)
    assert idx["ST"].to_numpy() == pytest.approx([(v1 + v13) / v, v2 / v, v13 / v], abs=0.03)
    assert res.convergence["y"]["verdict"] == "converged"


def test_sobol_linear_model_with_normal_inputs():
    # Analytic: y = sum c_i x_i with independent x_i ~ N(m_i, s_i): S1_i = ST_i = c_i^2 s_i^2 / sum c_j^2 s_j^2.
    c, s = np.array([1.0, 2.0, 0.5]), np.array([1.0, 0.5, 2.0])
    items = [Uncertain(f"x{i}", f"x.{i}", "normal", {"mean": 3.0, "std": float(s[i])}, False, None, 0.0)
             for i in range(3)]
    res = run(items, function_evaluator(items, lambda v: {"y": sum(c[i] * v[f"x.{i}"] for i in range(3))}),
              "sobol", 2048, seed=3)
    expected = c**2 * s**2 / np.sum(c**2 * s**2)
    assert res.indices["y"]["S1"].to_numpy() == pytest.approx(expected, abs=0.03)
    assert res.indices["y"]["ST"].to_numpy() == pytest.approx(expected, abs=0.03)


def test_morris_ordering_of_a_known_function():
    # y = 10 x1 + 5 x2 + x3 + 0 x4 on U(0, 1): the elementary effects are the coefficients (analytic), so
    # mu* orders x1 > x2 > x3 > x4 and x4 has mu* = 0.
    items = [uniform(f"x{i}", 0.0, 1.0) for i in range(1, 5)]
    coef = [10.0, 5.0, 1.0, 0.0]
    res = run(items, function_evaluator(items, lambda v: {"y": sum(k * v[f"x.x{i + 1}"] for i, k in enumerate(coef))}),
              "morris", 20, seed=0)
    mu = res.indices["y"]["mu_star"].to_numpy()
    assert list(np.argsort(-mu)) == [0, 1, 2, 3] and mu[3] == pytest.approx(0.0, abs=1e-12)


def test_seed_gives_identical_samples_and_indices_and_zero_is_a_seed():
    items = [uniform(f"x{i}", 0.0, 1.0) for i in range(3)]
    f = function_evaluator(items, lambda v: {"y": v["x.x0"] * v["x.x1"] + v["x.x2"] ** 2})
    a, b = run(items, f, "sobol", 256, seed=0), run(items, f, "sobol", 256, seed=0)
    assert a.samples.equals(b.samples)
    assert a.indices["y"].equals(b.indices["y"])  # bootstrap intervals included
    c = run(items, f, "sobol", 256, seed=1)
    assert not a.samples.equals(c.samples)


def test_parameter_without_effect_has_zero_total_index():
    # Reaction r2 consumes G, which is neither fed nor formed: its rate constant cannot move any output.
    data = liquid_case(**{
        "chemistry.species.G": {"molar_mass": "60 g/mol", "cp": "100 J/mol/K"},
        "chemistry.species.H": {"molar_mass": "60 g/mol", "cp": "100 J/mol/K"},
        "chemistry.reactions.r2": {"equation": "G -> H", "orders": {"G": 1}, "k_ref": "1 1/s",
                                   "activation_energy": "40 kJ/mol", "t_ref": "350 K"},
        "coolant": {"mode": "adiabatic"},
        "uncertain": {
            "k1": {"parameter": "chemistry.reactions.r1.k_ref", "distribution": "lognormal", "relative": True,
                   "median": 1.0, "sigma": 0.2},
            "E1": {"parameter": "chemistry.reactions.r1.activation_energy", "distribution": "uniform",
                   "min": "48 kJ/mol", "max": "52 kJ/mol"},
            "k2": {"parameter": "chemistry.reactions.r2.k_ref", "distribution": "lognormal", "relative": True,
                   "median": 1.0, "sigma": 0.5},
        },
        "numerics.rtol": 1e-8,
    })
    res = screen(make(data), "sobol", 128, seed=0)
    for name in ("max_temperature_K", "conversion"):
        st = res.indices[name].loc["k2"]
        assert abs(st["ST"]) <= max(st["ST_conf"], 1e-6)
        assert res.indices[name].loc["k1", "ST"] > 0.1


def test_batched_and_one_at_a_time_evaluations_agree():
    case = load_case(DEMO / "oxidation-screen.toml")
    items = read_uncertain(case)
    from tubewright.optimizer.screening.sampling import sample

    ux = sample(salib_problem(items), "sobol", 8, seed=0)
    batched = evaluate(case, items, ux, batched=True)
    single = evaluate(case, items, ux, batched=False)
    assert list(batched.status) == list(single.status)
    for key in ("max_temperature_K", "conversion", "product_selectivity", "pressure_drop_Pa"):
        a, b = batched.outputs[key], single.outputs[key]
        ok = np.isfinite(b)
        assert np.all(np.isfinite(a) == ok)
        assert np.max(np.abs(a[ok] - b[ok]) / np.abs(b[ok])) < 1e-4  # the integrators' tolerance is 1e-7


@pytest.mark.parametrize("entry, message", [
    ({"parameter": "chemistry.reactions.partial_oxidation.k_rf", "distribution": "uniform", "min": 1, "max": 2,
      "relative": True}, 'did you mean "k_ref"'),
    ({"parameter": "heat_transfer.multiplier", "distribution": "uniform", "min": 2.0, "max": 1.0},
     "must be below max"),
    ({"parameter": "heat_transfer.multiplier", "distribution": "normal", "mean": 1.0}, "needs mean, std"),
    ({"parameter": "feed.temperature", "distribution": "uniform", "min": "5 kg", "max": "600 K"}, "dimension"),
    ({"parameter": "heat_transfer.multiplier", "distribution": "lognormall", "median": 1.0, "sigma": 0.1},
     'did you mean "lognormal"'),
])
def test_bad_uncertain_entries(entry, message):
    case = load_case(DEMO / "oxidation.toml")
    from dataclasses import replace

    bad = replace(case, raw={**case.raw, "uncertain": {"u": entry}})
    with pytest.raises(CaseError, match=message):
        read_uncertain(bad)


def test_cli_screen_morris_json_files_and_reproducibility(tmp_path, capsys):
    import json

    from tubewright.optimizer.cli import main

    args = ["screen", str(DEMO / "oxidation-screen.toml"), "--method", "morris", "--samples", "6", "--json",
            "--policy", "censor", "--workers", "1"]
    assert main(args + ["--out", str(tmp_path / "a")]) == 0
    first = json.loads(capsys.readouterr().out)
    assert main(args + ["--out", str(tmp_path / "b")]) == 0
    second = json.loads(capsys.readouterr().out)
    assert first["indices"] == second["indices"] and first["seed"] == 0
    assert (tmp_path / "a" / "samples.csv").read_text() == (tmp_path / "b" / "samples.csv").read_text()
    conv = first["convergence"]["conversion"]
    assert conv["verdict"].startswith("too few samples to judge")  # N/4 = 1 trajectory judges nothing
    assert (tmp_path / "a" / "morris.png").stat().st_size > 10_000
    assert "Screening estimate" in first["caution"]
    assert set(first["indices"]["conversion"]) == {"partial oxidation", "k_combustion", "E_combustion", "order_O2",
                                                   "U", "feed_T"}


def test_cli_screen_refuses_a_sobol_count_off_the_powers_of_two_and_bad_entries(tmp_path, capsys):
    from tubewright.optimizer.cli import main

    bad = tmp_path / "bad.toml"
    bad.write_text(f'include = "{DEMO / "oxidation.toml"}"\n[uncertain.u]\nparameter = "heat_transfer.multiplyer"\n'
                   'distribution = "uniform"\nmin = 0.9\nmax = 1.1\n')
    assert main(["screen", str(bad)]) == 2
    assert 'did you mean "heat_transfer.multiplier"' in capsys.readouterr().err
    assert main(["screen", str(DEMO / "oxidation-screen.toml"), "--method", "sobol", "--samples", "6",
                 "--workers", "1"]) == 2
    assert "[--samples]" in capsys.readouterr().err  # SALib's rule: Sobol balances at powers of two
    assert main(["screen", str(DEMO / "oxidation-screen.toml"), "--method", "sobol", "--samples", "8",
                 "--workers", "1"]) == 0
    assert "S1" in capsys.readouterr().out


def test_parallel_and_single_process_batches_agree():
    case = load_case(DEMO / "oxidation-screen.toml")
    items = read_uncertain(case)
    from tubewright.optimizer.screening.sampling import sample

    ux = sample(salib_problem(items), "sobol", 16, seed=2)
    one = evaluate(case, items, ux, batch_size=64, workers=1)
    two = evaluate(case, items, ux, batch_size=64, workers=2)
    for key in one.outputs:
        assert np.array_equal(one.outputs[key], two.outputs[key], equal_nan=True)


def test_reoptimise_ranks_uncertainties_for_the_optimal_cost():
    res = screen(load_case(DEMO / "oxidation-design.toml"), "morris", 2, seed=0, reoptimise=True)
    idx = res.indices["optimal_objective"]
    assert set(idx.index) == {"k_partial", "k_combustion", "U"}
    assert (idx["mu_star"] > 0).all() and "optimal_length" in res.indices


def test_clopper_pearson_against_scipy():
    from scipy.stats import binomtest
    from tubewright.optimizer.screening.analysis import clopper_pearson

    for k, n in ((0, 20), (3, 20), (19, 20), (20, 20), (512, 1024)):
        ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")  # scipy's exact interval
        assert clopper_pearson(k, n) == pytest.approx((ci.low, ci.high), abs=1e-12)


def test_probability_of_passing_only_from_random_samples_with_an_interval():
    from tubewright.optimizer.screening.analysis import run
    from tubewright.optimizer.screening.evaluation import function_evaluator

    items = [Uncertain("x", "feed.temperature", "uniform", {"min": 0.0, "max": 1.0}, False, None, 0.5),
             Uncertain("y", "feed.pressure", "uniform", {"min": 0.0, "max": 1.0}, False, None, 0.5)]

    def fn(values):  # analytic: P(x < 0.3) = 0.3 for x uniform on [0, 1]
        x = values["feed.temperature"]
        return {"passes_hot_spot_limit": (x < 0.3).astype(float), "z": x + values["feed.pressure"]}

    sobol = run(items, function_evaluator(items, fn), "sobol", 512, 0)
    prob = sobol.probability_of_passing["passes_hot_spot_limit"]
    assert prob["samples"] == 1024 and prob["low_95"] <= 0.3 <= prob["high_95"]
    assert prob["estimate"] == pytest.approx(0.3, abs=0.03)
    morris = run(items, function_evaluator(items, fn), "morris", 20, 0)
    assert morris.probability_of_passing["passes_hot_spot_limit"] is None


def test_a_convergence_verdict_needs_enough_samples():
    from tubewright.optimizer.screening.analysis import run
    from tubewright.optimizer.screening.evaluation import function_evaluator

    items = [Uncertain("x", "feed.temperature", "uniform", {"min": 0.0, "max": 1.0}, False, None, 0.5),
             Uncertain("y", "feed.pressure", "uniform", {"min": 0.0, "max": 1.0}, False, None, 0.5)]
    res = run(items, function_evaluator(items, lambda v: {"z": v["feed.temperature"] + 2 * v["feed.pressure"]}),
              "morris", 4, 0)
    assert res.convergence["z"]["verdict"].startswith("too few samples to judge")
