"""Correlated uncertain inputs (a fitted parameter set) in screening: sampled in decorrelated coordinates
(theta = mean + L z, L the Cholesky factor; the sample is multivariate normal by construction, analytic),
re-referenced from k(T_fit) to the case's own T_ref, refused when malformed, and handed over by
``tubewright fit --design``."""

import math

import numpy as np
import pytest
from builders import DEMO, liquid_case, make
from tubewright.models import CaseError
from tubewright.models.reactions import arrhenius
from tubewright.optimizer.screening.sampling import sample, to_parameters
from tubewright.optimizer.screening.uncertain import read_uncertain, salib_problem

K, E = "chemistry.reactions.r1.k_ref", "chemistry.reactions.r1.activation_energy"
MEAN = [0.01, 50_000.0]
COV = [[1.0e-6, -0.05], [-0.05, 4.0e6]]  # correlation -0.025 / (1e-3 * 2e3) = -0.025


def case_with(block):
    return make(liquid_case(uncertain={"fit": block}))


def block(**changes):
    out = {"distribution": "multivariate_normal", "parameters": [K, E], "mean": MEAN, "covariance": COV}
    out.update(changes)
    return out


def test_samples_have_the_stated_mean_and_covariance():
    items = read_uncertain(case_with(block()))
    assert [u.name for u in items] == ["fit[1]", "fit[2]"] and salib_problem(items)["groups"] == ["fit", "fit"]
    unit = sample(salib_problem(items), "sobol", 4096, seed=3)
    values = to_parameters(items, unit)
    theta = np.column_stack([values[K], values[E]])
    assert theta.mean(axis=0) == pytest.approx(MEAN, rel=2e-3)
    assert np.cov(theta.T) == pytest.approx(np.array(COV), rel=0.03, abs=1e-9)


def test_k_given_at_a_reference_temperature_is_carried_to_the_case_t_ref():
    case = case_with(block(reference_temperature="330 K"))
    items = read_uncertain(case)
    unit = sample(salib_problem(items), "sobol", 64, seed=1)
    values = to_parameters(items, unit)
    z_theta = np.column_stack([items[0].from_unit(unit[:, 0]), items[1].from_unit(unit[:, 1])])
    theta = np.array(MEAN) + z_theta @ np.linalg.cholesky(np.array(COV)).T
    t_ref = case.reactions[0].t_ref  # 350 K in the test case
    expected = [arrhenius(np, k, e, 330.0, t_ref) for k, e in theta]
    assert values[K] == pytest.approx(expected, rel=1e-12)
    assert values[K][0] == pytest.approx(theta[0, 0] * math.exp(-theta[0, 1] / 8.314462618 * (1 / t_ref - 1 / 330)))


@pytest.mark.parametrize("changes,message", [
    ({"covariance": [[1.0, 2.0], [2.0, 1.0]]}, "positive definite"),
    ({"covariance": [[-1.0, 0.0], [0.0, 1.0]]}, "positive definite"),
    ({"covariance": [[1.0, 0.1], [0.2, 1.0]]}, "symmetric"),
    ({"covariance": [[1.0, 0.0, 0.0]]}, "covariance"),
    ({"mean": [1.0]}, "covariance"),
    ({"parameters": [K, "chemistry.reactions.r9.k_ref"]}, "r9"),
    ({"parameters": [K, K]}, "twice"),
    ({"parameters": [E], "mean": [5e4], "covariance": [[1e6]], "reference_temperature": "330 K"}, "k_ref"),
    ({"covariance": [[1.0e-6, float("nan")], [float("nan"), 4.0e6]]}, "finite"),
])
def test_malformed_sets_are_refused(changes, message):
    with pytest.raises(CaseError, match=message):
        read_uncertain(case_with(block(**changes)))


def test_fit_hands_its_uncertainty_to_a_design_case(tmp_path, capsys):
    from test_fit import write_lab
    from tubewright.models import load_case
    from tubewright.optimizer.cli import main
    from tubewright.optimizer.screening.screen import screen

    case, data, _ = write_lab(tmp_path)
    design = tmp_path / "design.toml"
    design.write_text(f'include = "{case}"\ntitle = "a design with the same chemistry"\n[tube]\nlength = "3 m"\n')
    out = tmp_path / "out"
    assert main(["fit", str(case), "--data", str(data), "--out", str(out), "--design", str(design)]) == 0
    capsys.readouterr()
    written = load_case(out / "design-fitted.toml")
    import json

    answer = json.loads((out / "fit.json").read_text())
    k_fit, e_fit = answer["estimates"]["r1.k_ref"], answer["estimates"]["r1.activation_energy"]
    t_fit = answer["reference_temperature_K"]
    rx = written.reactions[0]
    assert rx.k_ref == pytest.approx(arrhenius(np, k_fit, e_fit, t_fit, rx.t_ref), rel=1e-12)
    items = read_uncertain(written)
    assert [u.path for u in items] == [K, E]
    cov = np.array(answer["statistics"]["covariance"])
    assert items[0].joint.cholesky @ items[0].joint.cholesky.T == pytest.approx(cov, rel=1e-9)
    res = screen(written, "morris", 4, seed=0)
    assert list(res.indices["conversion"].index) == ["fitted_kinetics"]  # the correlated set as one group


def test_design_needs_out_and_the_same_reactions(tmp_path, capsys):
    from test_fit import write_lab
    from tubewright.optimizer.cli import main

    case, data, _ = write_lab(tmp_path)
    assert main(["fit", str(case), "--data", str(data), "--design", str(DEMO / "oxidation.toml")]) == 2
    assert "--design" in capsys.readouterr().err
    assert main(["fit", str(case), "--data", str(data), "--out", str(tmp_path / "o"),
                 "--design", str(DEMO / "oxidation.toml")]) == 2
    assert "r1" in capsys.readouterr().err
    assert (tmp_path / "o" / "fit.json").exists()  # the fit itself is kept
    assert main(["fit", str(case), "--data", str(data), "--out", str(tmp_path / "p"),
                 "--design", str(tmp_path / "missing.toml")]) == 2  # refused before fitting
    assert not (tmp_path / "p").exists()
