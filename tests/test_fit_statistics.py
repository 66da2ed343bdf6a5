"""The statistics of a weighted least-squares fit (optimizer.fitting.statistics): a certified nonlinear
regression, interval coverage over seeds, the Arrhenius reference temperature, identifiability, the
variance test and lack of fit. The fits themselves are done by scipy.optimize.least_squares with exact
Jacobians here: these tests check the statistics, not an estimator."""

import numpy as np
import pytest
from scipy.optimize import least_squares
from tubewright.optimizer.fitting.statistics import (
    arrhenius_reference_temperature,
    gauss_newton_statistics,
    lack_of_fit,
)

# NIST Statistical Reference Datasets, nonlinear regression, Misra1a (lower difficulty): y = b1 (1 - exp(-b2 x)),
# a first-order approach to completion. Data and certified values as published by NIST (recalled from memory;
# the recalled data reproduce the certified residual sum of squares to 11 digits, which checks both).
MISRA1A_X = [77.6, 114.9, 141.1, 190.8, 239.9, 289.0, 332.8, 378.4, 434.8, 477.3, 536.8, 593.1, 689.1, 760.0]
MISRA1A_Y = [10.07, 14.73, 17.94, 23.93, 29.61, 35.18, 40.02, 44.82, 50.76, 55.05, 61.01, 66.40, 75.47, 81.78]
MISRA1A_CERTIFIED = {"b": [2.3894212918e02, 5.5015643181e-04], "sd": [2.7070075241e00, 7.2668688436e-06],
                     "rss": 1.2455138894e-01, "residual_sd": 1.0187876330e-01}


def _approach(b, x):
    return b[0] * (1 - np.exp(-b[1] * x))


def _approach_jac(b, x):
    return np.column_stack([1 - np.exp(-b[1] * x), b[0] * x * np.exp(-b[1] * x)])


def _fit_approach(x, y, sigma, start):
    fit = least_squares(lambda b: (_approach(b, x) - y) / sigma, start, jac=lambda b: _approach_jac(b, x) / sigma,
                        x_scale=np.abs(start), xtol=1e-15, ftol=1e-15, gtol=1e-15)
    return fit.x, fit.fun, fit.jac


def test_nist_misra1a_certified_values():
    x, y = np.array(MISRA1A_X), np.array(MISRA1A_Y)
    b, r, J = _fit_approach(x, y, 1.0, np.array([500.0, 1e-4]))  # NIST start 1
    st = gauss_newton_statistics(["b1", "b2"], b, r, J, error_model="estimated")
    cert = MISRA1A_CERTIFIED
    assert st.estimates == pytest.approx(cert["b"], rel=1e-7)
    assert st.standard_errors == pytest.approx(cert["sd"], rel=1e-6)
    assert st.sum_of_squares == pytest.approx(cert["rss"], rel=1e-8)
    assert np.sqrt(st.residual_variance) == pytest.approx(cert["residual_sd"], rel=1e-8)
    assert st.dof == 12 and st.correlation[0, 0] == pytest.approx(1.0)


def test_intervals_cover_the_true_values_over_seeds():
    # Synthetic data from known parameters with seeded Gaussian noise of stated sigma: each 95 % interval must
    # cover its true value in 90-99 % of 200 seeds (binomial: 95 % +- 3.1 % is the 99 % range at 200 seeds).
    true = np.array([240.0, 5.5e-4])
    x = np.linspace(50, 800, 12)
    sigma = 0.4
    covered = np.zeros(2)
    seeds = 200
    for seed in range(seeds):
        y = _approach(true, x) + np.random.default_rng(seed).normal(0.0, sigma, x.size)
        b, r, J = _fit_approach(x, y, sigma, np.array([200.0, 4e-4]))
        st = gauss_newton_statistics(["b1", "b2"], b, r, J, error_model="stated")
        covered += (st.intervals[:, 0] <= true) & (true <= st.intervals[:, 1])
    rate = covered / seeds
    assert np.all((rate >= 0.90) & (rate <= 0.99)), rate


def _linear_arrhenius(temps, t_ref, seed=1):
    """ln k = ln k_ref - (E/R) (1/T - 1/T_ref): linear in (ln k_ref, E/R); J is exact."""
    rng = np.random.default_rng(seed)
    e_over_r = 9000.0
    ln_k = np.log(2.0) - e_over_r * (1 / temps - 1 / 530.0) + rng.normal(0, 0.05, temps.size)
    J = np.column_stack([np.ones_like(temps), -(1 / temps - 1 / t_ref)])
    theta, *_ = np.linalg.lstsq(J, ln_k, rcond=None)
    return gauss_newton_statistics(["ln_k_ref", "E_over_R"], theta, J @ theta - ln_k, J)


def test_arrhenius_correlation_vanishes_at_the_mean_reciprocal_temperature():
    # Analytic for the linearised Arrhenius fit (columns 1 and -u, u = 1/T - 1/T_ref): (J'J)^-1 is
    # proportional to [[mean(u^2), mean(u)], [mean(u), 1]], so corr(ln k_ref, E) = mean(u)/sqrt(mean(u^2)):
    # near +-1 for T_ref far from the data and exactly 0 at T_ref = 1/mean(1/T).
    temps = np.linspace(500.0, 560.0, 15)
    far = _linear_arrhenius(temps, 1000.0)
    t_ref = arrhenius_reference_temperature(temps)
    near = _linear_arrhenius(temps, t_ref)
    u = 1 / temps - 1 / 1000.0
    assert far.correlation[0, 1] == pytest.approx(np.mean(u) / np.sqrt(np.mean(u**2)), rel=1e-9)
    assert abs(far.correlation[0, 1]) > 0.99
    assert abs(near.correlation[0, 1]) < 1e-9
    assert 500.0 < t_ref < 560.0
    assert near.standard_errors[1] == pytest.approx(far.standard_errors[1], rel=1e-9)  # E does not depend on T_ref


def test_reference_temperature_refuses_bad_temperatures():
    for bad in ([], [500.0, -3.0], [500.0, float("nan")]):
        with pytest.raises(ValueError, match="reference temperature"):
            arrhenius_reference_temperature(bad)


def test_parameters_seen_only_as_a_product_are_named_as_not_identifiable():
    # y = a b x: only the product a b is determined by any data (rank-deficient sensitivity matrix)
    x = np.linspace(1, 5, 8)
    a, b = 2.0, 3.0
    J = np.column_stack([b * x, a * x])
    st = gauss_newton_statistics(["a", "b", "unrelated"], np.array([a, b, 1.0]), np.zeros(8) + 0.01,
                                 np.column_stack([J, np.sin(x)]))
    weak = st.identifiability["weak_directions"]
    assert len(weak) == 1 and weak[0]["parameters"] == ["a", "b"] and "not identifiable" in weak[0]["kind"]
    assert np.isinf(st.standard_errors[0]) and np.isinf(st.standard_errors[1]) and np.isfinite(st.standard_errors[2])
    assert any("a, b" in w for w in st.warnings)


def test_stated_errors_far_from_the_residuals_are_flagged():
    # errors stated 3x too large: residual variance near 1/9 (chi-square test, analytic distribution)
    rng = np.random.default_rng(4)
    x = np.linspace(0, 1, 60)
    J = np.column_stack([np.ones_like(x), x])
    y = 1.0 + 2.0 * x + rng.normal(0, 0.1, x.size)
    for sigma, word in ((0.3, "below"), (0.03, "above")):
        theta, *_ = np.linalg.lstsq(J, y, rcond=None)
        st = gauss_newton_statistics(["a", "b"], theta, (J @ theta - y) / sigma, J / sigma, error_model="stated")
        assert any(word in w for w in st.warnings), st.warnings
    st = gauss_newton_statistics(["a", "b"], theta, (J @ theta - y) / 0.1, J / 0.1, error_model="stated")
    assert not st.warnings and 0.6 < st.residual_variance < 1.5


def test_lack_of_fit_from_replicates():
    # A straight line fitted to curved data with replicates: F large (p < 1e-6); fitted to straight data:
    # p above 0.01 (F test of lack of fit, Draper and Smith 1998, sec. 2.1)
    rng = np.random.default_rng(7)
    levels = np.repeat(np.linspace(0, 1, 6), 4)
    J = np.column_stack([np.ones_like(levels), levels])
    for truth, curved in ((1 + 2 * levels + 3 * levels**2, True), (1 + 2 * levels, False)):
        y = truth + rng.normal(0, 0.05, levels.size)
        theta, *_ = np.linalg.lstsq(J, y, rcond=None)
        out = lack_of_fit(J @ theta - y, levels, 2)
        assert out["dof_pure_error"] == 18 and out["dof_lack_of_fit"] == 4
        assert (out["p_value"] < 1e-6) if curved else (out["p_value"] > 0.01)
    assert lack_of_fit(np.ones(5), np.arange(5), 2) is None  # no replicates: no test


def test_parameters_of_very_different_magnitude_keep_finite_errors():
    # Misra1a with b2 expressed in a unit 1e12 times larger (value ~5.5e-16): the same fit, so the same
    # relative standard errors as certified; a kinetic fit has k ~ 1e-9 beside E_a ~ 1e5 in SI
    x, y = np.array(MISRA1A_X), np.array(MISRA1A_Y)
    b, r, J = _fit_approach(x, y, 1.0, np.array([500.0, 1e-4]))
    scale = 1e-12
    st = gauss_newton_statistics(["b1", "c2"], np.array([b[0], b[1] * scale]), r, J / np.array([1.0, scale]))
    cert = MISRA1A_CERTIFIED
    assert st.standard_errors == pytest.approx([cert["sd"][0], cert["sd"][1] * scale], rel=1e-6)
    assert not st.identifiability["weak_directions"]
