"""Design-based means and proportions of a domain, with their linearised variance.

A domain mean is the ratio Σ wᵢyᵢ / Σ wᵢ over the domain; its influence contributions
wᵢ(yᵢ − ȳ)/Σw (zero outside the domain) go through the same cluster-total variance as every
other estimate (Woodruff 1971; Lumley, *Complex Surveys*, 2010, ch. 2). Rows outside the
domain keep their place, so strata and clusters keep their full count.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cohortstone.design import Design, cluster_totals, covariance_of_totals, degrees_of_freedom


@dataclass(frozen=True)
class DomainMean:
    estimate: float
    variance: float
    df: int | None        # design df; None without a design
    n: int                # unweighted people in the domain
    weighted_n: float     # Σ w over the domain (the population it represents)

    @property
    def se(self) -> float:
        return float(np.sqrt(max(self.variance, 0.0)))


def influence(y: np.ndarray, domain: np.ndarray, weight: np.ndarray) -> tuple[float, np.ndarray]:
    """Domain mean of `y` and each row's influence contribution (0 outside the domain)."""
    w = np.where(domain, weight, 0.0)
    total = w.sum()
    yy = np.where(domain, y, 0.0)
    mean = float(np.sum(w * yy) / total)
    return mean, w * (yy - mean) / total


def variance(design: Design, contributions: np.ndarray) -> float:
    """Linearised variance of an estimate from its per-row influence contributions."""
    totals = cluster_totals(design, contributions[:, None], np.ones(len(contributions)))
    return float(covariance_of_totals(design, totals)[0, 0])


def domain_mean(design: Design, y: np.ndarray, domain: np.ndarray) -> DomainMean:
    """Weighted mean of `y` over `domain` with design-based variance and df.

    Without a design (simple random sample) the variance is s²/n with the weighted-sample
    variance s² = Σ(yᵢ − ȳ)²/(n − 1), df = n − 1, so a proportion's interval reduces to the
    exact Clopper–Pearson one.
    """
    weight = design.weight
    n = int(np.count_nonzero(domain & (weight > 0)))
    mean, contributions = influence(y, domain, weight)
    weighted_n = float(weight[domain].sum())
    if not design.design_based:
        values = y[domain]
        binary = np.isin(values, (0.0, 1.0)).all()
        spread = mean * (1 - mean) if binary else float(np.var(values, ddof=1)) if n > 1 else 0.0
        return DomainMean(mean, spread / n, n - 1, n, weighted_n)
    return DomainMean(mean, variance(design, contributions),
                      degrees_of_freedom(design, domain), n, weighted_n)
