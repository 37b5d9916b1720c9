"""Weighted logistic regression by Newton–Raphson (IRLS) and its linearised design variance.

The survey variance is the sandwich H⁻¹ S H⁻¹ where S is the design covariance of the cluster
totals of the score contributions wᵢ(yᵢ − pᵢ)xᵢ (Binder, Int Stat Rev 1983; the estimator of
svyglm in Lumley, *Complex Surveys*, 2010, ch. 5). Without a design the model-based H⁻¹ is used.
"""
from __future__ import annotations

import numpy as np
from scipy.special import expit

from cohortstone.design import Design, cluster_totals, covariance_of_totals, degrees_of_freedom
from cohortstone.models.fit import Fit

MAX_ITERATIONS = 100
TOLERANCE = 1e-12
SEPARATION_ETA = 30.0  # |linear predictor| at which a fitted probability is 0 or 1 to 1e-13


def _log_likelihood(eta: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    return float(np.sum(w * (y * eta - np.logaddexp(0.0, eta))))


def _newton(x: np.ndarray, y: np.ndarray, w: np.ndarray
            ) -> tuple[np.ndarray, np.ndarray, bool, int]:
    """Maximise Σ wᵢ ℓᵢ(β); returns β, the information matrix, convergence and iterations."""
    p = x.shape[1]
    beta = np.zeros(p)
    ybar = np.sum(w * y) / np.sum(w)
    beta[0] = np.log(ybar / (1 - ybar))
    eta = x @ beta
    loglik = _log_likelihood(eta, y, w)
    info = np.eye(p)
    for iteration in range(1, MAX_ITERATIONS + 1):
        mu = expit(eta)
        info = x.T @ (x * (w * mu * (1 - mu))[:, None])
        score = x.T @ (w * (y - mu))
        try:
            step = np.linalg.solve(info, score)
        except np.linalg.LinAlgError:
            step = np.linalg.lstsq(info, score, rcond=None)[0]
        for _ in range(30):  # step halving keeps every iteration an ascent
            candidate = beta + step
            new_eta = x @ candidate
            new_loglik = _log_likelihood(new_eta, y, w)
            if new_loglik >= loglik - 1e-9 * abs(loglik):
                break
            step = step / 2
        beta, eta, loglik = candidate, new_eta, new_loglik
        if np.max(np.abs(step) / (1 + np.abs(beta))) < TOLERANCE:
            mu = expit(eta)
            info = x.T @ (x * (w * mu * (1 - mu))[:, None])
            return beta, info, True, iteration
    return beta, info, False, MAX_ITERATIONS


def separated_columns(x: np.ndarray, y: np.ndarray, w: np.ndarray) -> list[int]:
    """Indicator columns whose '1' rows in the domain are all cases or all non-cases."""
    inside = w > 0
    out = []
    for j in range(1, x.shape[1]):
        col = x[inside, j]
        if not np.isin(col, (0.0, 1.0)).all():
            continue
        ones = col == 1
        if ones.any() and (np.all(y[inside][ones] == 0) or np.all(y[inside][ones] == 1)):
            out.append(j)
    return out


def fit(x: np.ndarray, y: np.ndarray, w: np.ndarray, design: Design, names: list[str]) -> Fit:
    """Fit on rows with w > 0; variance from the design (all rows), or model-based without one."""
    beta, info, converged, iterations = _newton(x, y, w)
    flag = ""
    separated = separated_columns(x, y, w)
    eta_max = float(np.max(np.abs(x[w > 0] @ beta))) if converged else np.inf
    if separated:
        flag = ("separation: " + ", ".join(names[j] for j in separated)
                + " has only cases or only non-cases")
    elif not converged and eta_max > SEPARATION_ETA:
        flag = "separation: fitted probabilities reach 0 or 1"
    elif not converged:
        flag = f"not converged after {iterations} iterations"
    try:
        bread = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        bread = np.full_like(info, np.nan)
        flag = flag or "singular information matrix: a term is constant or collinear"
    if not np.all(np.isfinite(bread)) or np.linalg.cond(info) > 1e14:
        flag = flag or "singular information matrix: a term is constant or collinear"
    in_domain = w > 0
    if design.design_based:
        mu = expit(x @ beta)
        totals = cluster_totals(design, x, w * (y - mu))
        cov = bread @ covariance_of_totals(design, totals) @ bread
        df: int | None = degrees_of_freedom(design, in_domain)
    else:
        cov, df = bread, None
    return Fit(coef=beta, cov=cov, df=df, converged=converged, iterations=iterations, flag=flag)
