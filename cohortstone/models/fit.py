"""Shared fit records and the one place where intervals, p-values and Wald tests are made.

Design-based inference uses t with the design df (NHANES analytic guidelines); a model without
a design uses the normal distribution. Ratio intervals are Wald intervals on the log scale.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class Fit:
    """Coefficients on the log scale with their covariance and the df for inference."""

    coef: np.ndarray
    cov: np.ndarray
    df: int | None          # None: normal reference distribution
    converged: bool
    iterations: int
    flag: str = ""          # "" | "separation: …" | "not converged: …"

    @property
    def se(self) -> np.ndarray:
        return np.sqrt(np.clip(np.diag(self.cov), 0, None))


def critical_value(df: int | None, level: float = 0.95) -> float:
    q = 0.5 + level / 2
    return float(stats.norm.ppf(q) if df is None else stats.t.ppf(q, df))


def p_values(z: np.ndarray, df: int | None) -> np.ndarray:
    z = np.abs(np.asarray(z, dtype=float))
    return 2 * (stats.norm.sf(z) if df is None else stats.t.sf(z, df))


def wald_test(fit: Fit, index: list[int]) -> float:
    """p-value of H0: coef[index] = 0 jointly.

    With design df d and k constraints the Wald statistic W is referred to F(k, d−k+1) after
    scaling by (d−k+1)/(d·k) (adjusted Wald test; Korn & Graubard, Am Stat 1990); without a
    design, W is referred to chi-square(k).
    """
    b = fit.coef[index]
    v = fit.cov[np.ix_(index, index)]
    w = float(b @ np.linalg.solve(v, b))
    k = len(index)
    if fit.df is None:
        return float(stats.chi2.sf(w, k))
    d = fit.df
    if d - k + 1 <= 0:
        return float("nan")
    return float(stats.f.sf(w * (d - k + 1) / (d * k), k, d - k + 1))
