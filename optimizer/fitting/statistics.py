"""Statistics of a weighted least-squares fit at its optimum, in the Gauss-Newton (linearised) approximation.

Residuals are weighted: r_i = (model_i - measured_i) / sigma_i, and J = d r / d theta at the optimum. Then
(Bates and Watts 1988, Nonlinear Regression Analysis and Its Applications, ch. 2; Seber and Wild 1989,
Nonlinear Regression, sec. 2.1):

    stated error model (sigma_i known):     Cov(theta) = (J'J)^-1,        intervals theta +- z(0.975) se
    error estimated from the residuals:     Cov(theta) = s^2 (J'J)^-1,    intervals theta +- t(0.975, dof) se
    s^2 = sum r_i^2 / (n - p)

With a stated error model, s^2 is tested against 1 (chi-square with n - p degrees of freedom): a residual
variance far above 1 says the model or the stated errors are wrong, far below says the errors were stated
too large. Identifiability: the singular values of the sensitivity matrix scaled by the parameter values
(J diag|theta|); a singular value below RANK_TOLERANCE of the largest means rank deficiency, a condition
number above CONDITION_LIMIT bad conditioning; the parameters involved are those with a large component in
the corresponding right singular vectors. Lack of fit (replicate runs): the F test of the lack-of-fit mean
square against the pure-error mean square (Draper and Smith 1998, Applied Regression Analysis, sec. 2.1).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

RANK_TOLERANCE = 1e-10  # singular value / largest: below this the parameters are not separately identifiable
CONDITION_LIMIT = 1e4  # condition number of the scaled sensitivity matrix above which the warning is given
INVOLVED = 0.3  # component of a weak right singular vector above which a parameter is named


@dataclass
class FitStatistics:
    names: list
    estimates: np.ndarray
    covariance: np.ndarray
    standard_errors: np.ndarray
    intervals: np.ndarray  # (parameters, 2): lower, upper at ``level``
    correlation: np.ndarray
    observations: int
    dof: int
    sum_of_squares: float  # of the weighted residuals
    residual_variance: float  # s^2 (1 is expected with a stated error model)
    error_model: str  # "stated" or "estimated"
    level: float
    variance_test: dict | None  # stated error model: chi-square test of s^2 against 1
    identifiability: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)

    def as_dict(self) -> dict:
        return {
            "parameters": [{"name": n, "estimate": float(e), "standard_error": float(s),
                            "interval": [float(lo), float(hi)]}
                           for n, e, s, (lo, hi) in zip(self.names, self.estimates, self.standard_errors,
                                                        self.intervals)],
            "correlation": self.correlation.tolist(), "covariance": self.covariance.tolist(),
            "observations": self.observations, "dof": self.dof, "sum_of_squares": self.sum_of_squares,
            "residual_variance": self.residual_variance, "error_model": self.error_model, "level": self.level,
            "variance_test": self.variance_test, "identifiability": self.identifiability, "warnings": self.warnings,
        }


def gauss_newton_statistics(names, estimates, residuals, jacobian, error_model: str = "estimated",
                            level: float = 0.95) -> FitStatistics:
    """Covariance, standard errors, intervals, correlation, variance test and identifiability at the
    optimum of a weighted least-squares fit (weighted ``residuals`` and their ``jacobian``)."""
    from scipy import stats

    if error_model not in ("stated", "estimated"):
        raise ValueError(f'error_model must be "stated" or "estimated", not {error_model!r}')
    theta = np.asarray(estimates, dtype=float)
    r = np.asarray(residuals, dtype=float)
    J = np.asarray(jacobian, dtype=float).reshape(len(r), len(theta))
    n, p = J.shape
    dof = n - p
    if dof < 1 and error_model == "estimated":
        raise ValueError(f"{n} observations for {p} parameters: no degrees of freedom to estimate the error")
    ssr = float(r @ r)
    s2 = ssr / dof if dof > 0 else float("nan")
    ident = identifiability(names, theta, J)
    # (J'J)^-1 = D (S'S)^-1 D with S = J D scaled by the parameter values (parameters of very different
    # magnitudes, as k and E_a, would otherwise look rank-deficient), through the singular values of S;
    # directions that are not identifiable get an infinite variance
    d = np.where(np.abs(theta) > 0, np.abs(theta), 1.0)
    _, sv, vt = np.linalg.svd(J * d, full_matrices=False)
    inv_sv2 = np.where(sv > RANK_TOLERANCE * max(sv.max(initial=0.0), 1e-300), 1.0 / np.maximum(sv, 1e-300) ** 2,
                       np.inf)
    with np.errstate(invalid="ignore"):
        scaled = (vt.T * inv_sv2) @ vt if np.all(np.isfinite(inv_sv2)) else _infinite_where_weak(vt, inv_sv2)
    cov = d[:, None] * scaled * d[None, :] * (s2 if error_model == "estimated" else 1.0)
    se = np.sqrt(np.diag(cov))
    q = stats.t.ppf(0.5 + level / 2, dof) if error_model == "estimated" else stats.norm.ppf(0.5 + level / 2)
    intervals = np.column_stack([theta - q * se, theta + q * se])
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(se, se)
    variance_test = None
    warnings = list(ident.get("warnings", []))
    if error_model == "stated" and dof > 0:
        p_high = float(stats.chi2.sf(ssr, dof))
        p_low = float(stats.chi2.cdf(ssr, dof))
        variance_test = {"residual_variance": s2, "expected": 1.0, "dof": dof,
                         "p_value_too_large": p_high, "p_value_too_small": p_low}
        if p_high < 0.01:
            warnings.append(f"residual variance {s2:.3g} is well above the stated error model's 1 (chi-square "
                            f"p = {p_high:.2g}): the model misses the data or the stated errors are too small")
        elif p_low < 0.01:
            warnings.append(f"residual variance {s2:.3g} is well below the stated error model's 1 (chi-square "
                            f"p = {p_low:.2g}): the stated errors are probably too large, so the intervals are "
                            "too wide")
    return FitStatistics(list(names), theta, cov, se, intervals, corr, n, dof, ssr, s2, error_model, level,
                         variance_test, ident, warnings)


def _infinite_where_weak(vt, inv_sv2):
    """(J'J)^-1 when some directions are not identifiable: the variance along them is infinite."""
    finite = np.isfinite(inv_sv2)
    cov = (vt[finite].T * inv_sv2[finite]) @ vt[finite]
    weak = np.any(np.abs(vt[~finite]) > INVOLVED, axis=0)
    cov[weak, :] = np.inf
    cov[:, weak] = np.inf
    return cov


def identifiability(names, estimates, jacobian) -> dict:
    """Singular values and condition number of the sensitivity matrix scaled by the parameter values; a
    warning naming the parameters of each weak direction."""
    theta = np.asarray(estimates, dtype=float)
    scale = np.where(np.abs(theta) > 0, np.abs(theta), 1.0)
    S = np.asarray(jacobian, dtype=float) * scale
    _, sv, vt = np.linalg.svd(S, full_matrices=False)
    top = sv.max(initial=0.0)
    cond = float(top / sv.min()) if len(sv) and sv.min() > 0 else float("inf")
    out = {"singular_values": sv.tolist(), "condition_number": cond, "weak_directions": [], "warnings": []}
    for k, s in enumerate(sv):
        if top > 0 and s >= top / CONDITION_LIMIT:
            continue
        involved = [names[i] for i in np.flatnonzero(np.abs(vt[k]) > INVOLVED)]
        kind = "not identifiable (rank-deficient)" if s <= RANK_TOLERANCE * top else "poorly identifiable"
        out["weak_directions"].append({"singular_value": float(s), "parameters": involved, "kind": kind})
        out["warnings"].append(f"{', '.join(involved)}: {kind} from these data (scaled sensitivity singular value "
                               f"{s:.3g} against {top:.3g}, condition number {cond:.3g}); fix one of them or add "
                               "runs that separate them")
    return out


def lack_of_fit(residuals, groups, n_parameters: int) -> dict | None:
    """F test of lack of fit from replicate runs. ``groups``: a label per residual, equal for replicates
    (runs at the same conditions, same measured quantity). None without replicates."""
    from scipy import stats

    r = np.asarray(residuals, dtype=float)
    labels = np.asarray(groups)
    _, inverse, counts = np.unique(labels, return_inverse=True, return_counts=True)
    dof_pe = int(np.sum(counts - 1))
    dof_total = len(r) - n_parameters
    dof_lof = dof_total - dof_pe
    if dof_pe < 1 or dof_lof < 1:
        return None
    means = np.bincount(inverse, weights=r) / counts  # within a group the model is the same: spread = data's
    ss_pe = float(np.sum((r - means[inverse]) ** 2))
    ss_lof = float(r @ r) - ss_pe
    f = (ss_lof / dof_lof) / (ss_pe / dof_pe) if ss_pe > 0 else float("inf")
    return {"F": f, "dof_lack_of_fit": dof_lof, "dof_pure_error": dof_pe,
            "p_value": float(stats.f.sf(f, dof_lof, dof_pe)), "pure_error_variance": ss_pe / dof_pe}


def arrhenius_reference_temperature(temperatures) -> float:
    """The reference temperature that decorrelates k_ref and E_a of k = k_ref exp(-E_a/R (1/T - 1/T_ref)):
    1 / mean(1/T) over the runs (for the linearised fit the covariance of ln k_ref and E_a is then zero,
    since sum(1/T_i - 1/T_ref) = 0)."""
    t = np.asarray(temperatures, dtype=float)
    if t.size == 0 or np.any(~np.isfinite(t)) or np.any(t <= 0):
        raise ValueError("the reference temperature needs positive, finite run temperatures")
    return float(1.0 / np.mean(1.0 / t))
