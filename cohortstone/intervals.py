"""Confidence intervals for proportions: Korn–Graubard (Clopper–Pearson on the effective n).

Korn EL, Graubard BI. Confidence intervals for proportions with small expected number of
positive counts estimated from survey data. Survey Methodology 1998;24:193–201. The effective
sample size p(1−p)/Var(p) is multiplied by (t_{n−1}/t_df)² so that the interval also reflects
the design's degrees of freedom.
"""
from __future__ import annotations

from dataclasses import dataclass

from scipy import stats


@dataclass(frozen=True)
class ProportionInterval:
    lower: float
    upper: float
    effective_n: float   # the df-adjusted effective sample size the interval used


def korn_graubard(p: float, variance: float, n: int, df: int | None,
                  level: float = 0.95) -> ProportionInterval:
    """Korn–Graubard interval; where the variance is 0 (p = 0 or 1) the actual n is used."""
    alpha = 1 - level
    if df is not None and df < 1 and n > 1:  # no design degrees of freedom: no interval
        return ProportionInterval(float("nan"), float("nan"), float("nan"))
    if variance > 0 and 0 < p < 1:
        n_eff = p * (1 - p) / variance
    else:
        n_eff = float(n)
    if df is not None and df > 0 and n > 1:
        n_eff *= (stats.t.ppf(alpha / 2, n - 1) / stats.t.ppf(alpha / 2, df)) ** 2
    x = n_eff * p
    lower = 0.0 if x <= 0 else float(stats.beta.ppf(alpha / 2, x, n_eff - x + 1))
    upper = 1.0 if x >= n_eff else float(stats.beta.ppf(1 - alpha / 2, x + 1, n_eff - x))
    return ProportionInterval(lower, upper, n_eff)
