"""Reliability of proportions following the NCHS Data Presentation Standards for Proportions.

Parker JD, Talih M, Malec DJ, et al. Vital Health Stat 2(175), 2017 (revised 2018, 2021).
The decision rules as we apply them (thresholds from the standard; the order is ours):

1. effective sample size below 30 -> suppress (effective n = n / design effect, never above n);
2. Korn–Graubard interval width of 0.30 or more -> suppress;
3. width above 0.05 and relative width (width / p) above 130% -> suppress;
4. otherwise present, but flag for review when the design df are below 8 or p is 0 or 1.
"""
from __future__ import annotations

import math

MIN_EFFECTIVE_N = 30
MAX_WIDTH = 0.30
NARROW_WIDTH = 0.05
MAX_RELATIVE_WIDTH = 1.30
MIN_DF = 8

OK, REVIEW, SUPPRESS = "ok", "review", "suppress"


def design_effect(variance: float, p: float, n: int) -> float:
    """Var(design) / Var(simple random sample of the same n), with Var(SRS) = p(1−p)/n (Kish)."""
    srs = p * (1 - p) / n if n > 0 else float("nan")
    return variance / srs if srs > 0 else float("nan")


def effective_n(n: int, deff: float) -> float:
    """n / design effect, capped at n (a design effect below 1 does not add information)."""
    if not math.isfinite(deff) or deff <= 1:
        return float(n)
    return n / deff


def judge(p: float, lower: float, upper: float, n_eff: float, df: int | None
          ) -> tuple[str, str]:
    """(`ok` | `review` | `suppress`, the reason in plain words)."""
    width = upper - lower
    if df is not None and df < 1:
        return SUPPRESS, "no design degrees of freedom (one cluster per stratum)"
    if n_eff < MIN_EFFECTIVE_N:
        return SUPPRESS, f"effective sample size {n_eff:.1f} is below {MIN_EFFECTIVE_N}"
    if width >= MAX_WIDTH:
        return SUPPRESS, f"confidence interval width {width:.3f} is {MAX_WIDTH} or more"
    if width > NARROW_WIDTH and (p <= 0 or width / p > MAX_RELATIVE_WIDTH):
        relative = "infinite" if p <= 0 else f"{100 * width / p:.0f}%"
        return SUPPRESS, (f"relative interval width {relative} exceeds "
                          f"{100 * MAX_RELATIVE_WIDTH:.0f}%")
    if df is not None and df < MIN_DF:
        return REVIEW, f"only {df} degrees of freedom (below {MIN_DF})"
    if p <= 0 or p >= 1:
        return REVIEW, "the estimate is 0% or 100%"
    return OK, ""
