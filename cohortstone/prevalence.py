"""Design-based prevalence: overall and by groups, Korn–Graubard intervals, NCHS reliability,
direct age standardization and a test for linear trend across survey cycles.

Every estimate is a domain mean computed on all rows with zero weight outside its domain.
Direct standardization: Σ_g s_g p_g over standard age groups g, with the linearised variance
of that sum of domain ratios (the estimator of post-stratifying to the standard's margins).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import PrevalenceSpec
from cohortstone.design import Design, degrees_of_freedom
from cohortstone.columns import require, suggest
from cohortstone.errors import DataError
from cohortstone.exposure import binary_outcome, level_text
from cohortstone.intervals import korn_graubard
from cohortstone.means import domain_mean, influence, variance
from cohortstone.models import logistic
from cohortstone.models.fit import critical_value, p_values
from cohortstone.reliability import SUPPRESS, design_effect, effective_n, judge
from cohortstone.standard_population import Standard

ESTIMATE_COLUMNS = ["prevalence", "se", "ci_lower", "ci_upper"]
ADJUSTED_COLUMNS = [f"adjusted_{c}" for c in ESTIMATE_COLUMNS]


def levels(series: pd.Series, rows: np.ndarray) -> list:
    """Levels of a grouping column among `rows`, in category order or sorted."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        present = set(series[rows].dropna())
        return [c for c in series.cat.categories if c in present]
    return sorted(series[rows].dropna().unique().tolist())


def lonely_in_domain(design: Design, domain: np.ndarray) -> list:
    """Strata with two or more clusters in the design but only one holding domain members."""
    active = np.zeros(design.n_clusters, bool)
    active[design.cluster[domain]] = True
    per_stratum = np.bincount(design.cluster_stratum, weights=active, minlength=design.n_strata)
    sizes = np.bincount(design.cluster_stratum, minlength=design.n_strata)
    return [design.stratum_labels[h] for h in np.flatnonzero((per_stratum == 1) & (sizes > 1))]


def _crude(design: Design, y: np.ndarray, domain: np.ndarray) -> dict:
    m = domain_mean(design, y, domain)
    ci = korn_graubard(m.estimate, m.variance, m.n, m.df)
    deff = design_effect(m.variance, m.estimate, m.n) if design.design_based else 1.0
    n_eff = effective_n(m.n, deff)
    word, reason = judge(m.estimate, ci.lower, ci.upper, n_eff, m.df)
    return {"n": m.n, "cases": int(y[domain].sum()), "population": m.weighted_n,
            "prevalence": m.estimate, "se": m.se, "ci_lower": ci.lower, "ci_upper": ci.upper,
            "df": m.df, "design_effect": deff, "effective_n": n_eff, "reliability": word,
            "reliability_reason": reason}


def age_groups(frame: pd.DataFrame, standard: Standard) -> np.ndarray:
    """Standard age group per row (−1 below the first cut or missing)."""
    if standard.column not in frame.columns:
        raise DataError(f"prevalence.standardize: the age column `{standard.column}` is not in "
                        f"the data.{suggest(standard.column, frame)}")
    age = frame[standard.column].to_numpy(dtype=float)
    index = np.searchsorted(np.asarray(standard.cuts), age, side="right") - 1
    return np.where(np.isnan(age), -1, index)


def _standardized(design: Design, y: np.ndarray, domain: np.ndarray, groups: np.ndarray,
                  standard: Standard) -> dict:
    """Directly standardized prevalence; blank when a standard age group has nobody."""
    covered = domain & (groups >= 0)
    blank = {c: np.nan for c in ADJUSTED_COLUMNS} | {"adjusted_reliability": "",
                                                     "adjusted_reliability_reason": ""}
    cells = [covered & (groups == g) for g in range(len(standard.cuts))]
    empty = [lab for lab, cell in zip(standard.labels(), cells) if not cell.any()]
    if empty:
        blank["adjusted_reliability_reason"] = ("not standardized: no one in standard age "
                                                f"group(s) {', '.join(empty)}")
        return blank
    estimate, contributions = 0.0, np.zeros(len(y))
    for share, cell in zip(standard.weights, cells):
        mean, part = influence(y, cell, design.weight)
        estimate += share * mean
        contributions += share * part
    n = int(covered.sum())
    if design.design_based:
        var, df = variance(design, contributions), degrees_of_freedom(design, covered)
    else:
        var, df = float(np.sum(contributions ** 2) * n / max(n - 1, 1)), n - 1
    ci = korn_graubard(estimate, var, n, df)
    deff = design_effect(var, estimate, n) if design.design_based else 1.0
    word, reason = judge(estimate, ci.lower, ci.upper, effective_n(n, deff), df)
    return {"adjusted_prevalence": estimate, "adjusted_se": float(np.sqrt(var)),
            "adjusted_ci_lower": ci.lower, "adjusted_ci_upper": ci.upper,
            "adjusted_reliability": word, "adjusted_reliability_reason": reason}


def validate(frame: pd.DataFrame, spec: PrevalenceSpec, population: np.ndarray,
             design: Design) -> tuple[np.ndarray, np.ndarray]:
    """Check the block's columns and outcome codes; the outcome's domain and 0/1 values."""
    require(frame, [("prevalence.outcome", spec.outcome),
                    *[("prevalence.by", c) for c in spec.by],
                    *([("prevalence.trend", spec.trend)] if spec.trend else [])])
    base = population & (design.weight > 0) & frame[spec.outcome].notna().to_numpy()
    if not base.any():
        raise DataError(f"prevalence.outcome: no one in the population has `{spec.outcome}` "
                        "recorded.")
    y = binary_outcome(frame, spec.outcome, base, "prevalence.outcome", need_both=False)
    if spec.standardize is not None:
        age_groups(frame, spec.standardize)
    return base, y


def estimate(frame: pd.DataFrame, spec: PrevalenceSpec, population: np.ndarray,
             design: Design) -> tuple[pd.DataFrame, list[str]]:
    """Full-precision prevalence rows (overall first, then each `by` column's levels) and notes."""
    base, y = validate(frame, spec, population, design)
    groups = age_groups(frame, spec.standardize) if spec.standardize else None
    by = list(spec.by) + ([spec.trend] if spec.trend and spec.trend not in spec.by else [])
    rows, notes = [], []
    domains = [("all", "all", base)]
    for column in by:
        series = frame[column]
        for level in levels(series, base):
            domains.append((column, level, base & (series == level).to_numpy()))
    for column, level, domain in domains:
        row = {"by": column, "group": level_text(level)}
        row |= _crude(design, y, domain)
        if spec.standardize is not None:
            row |= _standardized(design, y, domain, groups, spec.standardize)
        rows.append(row)
        lonely = lonely_in_domain(design, domain) if design.design_based else []
        if lonely:
            notes.append(f"{column} = {level}: stratum/strata {', '.join(map(str, lonely))} hold "
                         "members in one cluster only; their other clusters contribute zero "
                         "totals (the standard domain variance).")
    return pd.DataFrame(rows), notes


def published(full: pd.DataFrame) -> pd.DataFrame:
    """The table for publication: estimates of suppressed rows blanked (reason kept)."""
    out = full.copy()
    out.loc[out["reliability"] == SUPPRESS, ESTIMATE_COLUMNS] = np.nan
    if "adjusted_reliability" in out.columns:
        out.loc[out["adjusted_reliability"] == SUPPRESS, ADJUSTED_COLUMNS] = np.nan
    return out


def trend_test(frame: pd.DataFrame, spec: PrevalenceSpec, population: np.ndarray,
               design: Design) -> pd.DataFrame:
    """Design-based logistic regression on the cycle's order (0, 1, …): the odds ratio per
    cycle and its t test with the design df; adjusted for the standard age groups when the
    prevalence is standardized (common practice, no source)."""
    series = frame[spec.trend]
    base = population & (design.weight > 0) & frame[spec.outcome].notna().to_numpy() \
        & series.notna().to_numpy()
    order = levels(series, base)
    if len(order) < 3:
        raise DataError(f"prevalence.trend: column `{spec.trend}` has {len(order)} level(s) in "
                        "the population; a test for linear trend needs at least three cycles.")
    columns = [np.ones(len(frame)), series.map({v: i for i, v in enumerate(order)})
               .to_numpy(dtype=float)]
    adjusted = ""
    if spec.standardize is not None:
        groups = age_groups(frame, spec.standardize)
        base &= groups >= 0
        columns += [(groups == g).astype(float) for g in range(1, len(spec.standardize.cuts))]
        adjusted = f"standard age groups of `{spec.standardize.column}`"
    x = np.column_stack(columns)
    x[~base] = 0.0
    y = binary_outcome(frame, spec.outcome, base, "prevalence.outcome")
    w = design.weight * base
    fit = logistic.fit(x, y, w, design, ["(intercept)", spec.trend] + [""] * (x.shape[1] - 2))
    t = critical_value(fit.df)
    b, se = fit.coef[1], fit.se[1]
    return pd.DataFrame([{
        "outcome": spec.outcome, "by": spec.trend, "levels": " < ".join(map(str, order)),
        "odds_ratio_per_step": np.exp(b) if not fit.flag else np.nan,
        "ci_lower": np.exp(b - t * se) if not fit.flag else np.nan,
        "ci_upper": np.exp(b + t * se) if not fit.flag else np.nan,
        "p_value": float(p_values(np.array([b / se]), fit.df)[0]) if not fit.flag else np.nan,
        "df": fit.df, "adjusted_for": adjusted, "flag": fit.flag,
    }])
