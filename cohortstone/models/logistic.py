"""Weighted logistic regression by Newton–Raphson (IRLS) and its linearised design variance.

The survey variance is the sandwich H⁻¹ S H⁻¹ where S is the design covariance of the cluster
totals of the score contributions wᵢ(yᵢ − pᵢ)xᵢ (Binder, Int Stat Rev 1983; the estimator of
svyglm in Lumley, *Complex Surveys*, 2010, ch. 5). Without a design the model-based H⁻¹ is used.
"""
from __future__ import annotations

import numpy as np

from cohortstone.design import Design, cluster_totals, covariance_of_totals, degrees_of_freedom
from cohortstone.models.fit import Fit

MAX_ITERATIONS = 100
TOLERANCE = 1e-12
SEPARATION_ETA = 30.0  # |linear predictor| at which a fitted probability is 0 or 1 to 1e-13
BLOCK_ROWS = 4096  # rows per block of the information sum; a block and its copy stay in cache
PROBE_ROWS = 1024  # leading rows that usually show a column is not a 0/1 indicator


def _probability(eta: np.ndarray) -> np.ndarray:
    """Fitted probability 1 / (1 + e^−η) (the logistic function, as scipy's expit to an ulp)."""
    mu = np.negative(eta)
    with np.errstate(over="ignore"):  # e^−η = inf for η < −709 gives probability 0
        np.exp(mu, out=mu)
    mu += 1.0
    return np.reciprocal(mu, out=mu)


def _log_likelihood(eta: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    """Σ wᵢ (yᵢ ηᵢ − log(1 + e^ηᵢ)) with log(1 + e^η) = max(η, 0) + log1p(e^−|η|)."""
    softplus = np.abs(eta)
    np.negative(softplus, out=softplus)
    np.exp(softplus, out=softplus)
    np.log1p(softplus, out=softplus)
    softplus += np.maximum(eta, 0.0)
    softplus *= w
    wy = w * y
    wy *= eta
    return float(np.sum(wy) - np.sum(softplus))


def _information(x: np.ndarray, v: np.ndarray, r: np.ndarray | None = None
                 ) -> tuple[np.ndarray, np.ndarray | None]:
    """xᵀ diag(v) x and, given r, the score xᵀ r, summed over row blocks (no n×p temporary)."""
    n, p = x.shape
    info = np.zeros((p, p))
    score = None if r is None else np.zeros(p)
    weighted = np.empty((min(BLOCK_ROWS, n), p))
    for start in range(0, n, BLOCK_ROWS):
        block = x[start:start + BLOCK_ROWS]
        part = weighted[:len(block)]
        np.multiply(block, v[start:start + BLOCK_ROWS, None], out=part)
        info += block.T @ part
        if score is not None:
            score += r[start:start + BLOCK_ROWS] @ block
    return info, score


def _weights(mu: np.ndarray, w: np.ndarray) -> np.ndarray:
    """IRLS weights wᵢ μᵢ (1 − μᵢ)."""
    v = w * mu
    v *= 1.0 - mu
    return v


def _maximise(x: np.ndarray, y: np.ndarray, w: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray, bool, int, np.ndarray, np.ndarray]:
    """Newton–Raphson with step halving; also returns η = xβ and μ at the final β."""
    p = x.shape[1]
    beta = np.zeros(p)
    ybar = np.sum(w * y) / np.sum(w)
    beta[0] = np.log(ybar / (1 - ybar))
    eta = x @ beta
    loglik = _log_likelihood(eta, y, w)
    info = np.eye(p)
    for iteration in range(1, MAX_ITERATIONS + 1):
        mu = _probability(eta)
        residual = y - mu
        residual *= w
        info, score = _information(x, _weights(mu, w), residual)
        del mu, residual
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
            mu = _probability(eta)
            info = _information(x, _weights(mu, w))[0]
            return beta, info, True, iteration, eta, mu
    return beta, info, False, MAX_ITERATIONS, eta, _probability(eta)


def separated_columns(x: np.ndarray, y: np.ndarray, w: np.ndarray) -> list[int]:
    """Indicator columns whose '1' rows in the domain are all cases or all non-cases."""
    inside = w > 0
    outside = ~inside
    not_case, not_noncase = y != 1, y != 0  # NaN counts as neither, as in `y == 0` tests
    out = []
    for j in range(1, x.shape[1]):
        col = x[:, j]
        probe = col[:PROBE_ROWS][inside[:PROBE_ROWS]]
        if not np.isin(probe, (0.0, 1.0)).all():  # cheap exit for continuous columns
            continue
        ones = col == 1
        if not (ones | (col == 0) | outside).all():
            continue
        ones &= inside
        if ones.any() and (not (ones & not_noncase).any() or not (ones & not_case).any()):
            out.append(j)
    return out


def fit(x: np.ndarray, y: np.ndarray, w: np.ndarray, design: Design, names: list[str]) -> Fit:
    """Fit on rows with w > 0; variance from the design (all rows), or model-based without one."""
    beta, info, converged, iterations, eta, mu = _maximise(x, y, w)
    flag = ""
    separated = separated_columns(x, y, w)
    eta_max = float(np.max(np.abs(eta[w > 0])))
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
        totals = cluster_totals(design, x, w * (y - mu))
        cov = bread @ covariance_of_totals(design, totals) @ bread
        df: int | None = degrees_of_freedom(design, in_domain)
        if df < 1:
            flag = flag or ("no design degrees of freedom: the population lies in one cluster "
                            "per stratum, so its variance cannot be estimated")
    else:
        cov, df = bread, None
    return Fit(coef=beta, cov=cov, df=df, converged=converged, iterations=iterations, flag=flag)
