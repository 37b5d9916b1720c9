"""Turn a logistic fit into the tidy odds-ratio rows of the contract (one row per term level)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import ModelSpec
from cohortstone.exposure import ModelMatrix
from cohortstone.models.fit import Fit, critical_value, p_values

COLUMNS = ["model", "term", "level", "role", "per", "odds_ratio", "ci_lower", "ci_upper",
           "p_value", "n", "cases", "df", "p_trend", "p_joint", "log_odds_ratio", "se", "flag"]


def _counts(matrix: ModelMatrix, mask: np.ndarray) -> tuple[int, int]:
    rows = matrix.in_model & mask
    return int(rows.sum()), int(matrix.y[rows].sum())


def odds_ratio_rows(spec: ModelSpec, matrix: ModelMatrix, fit: Fit,
                    p_trend: float | None, p_joint: float | None) -> pd.DataFrame:
    """Rows for the exposure (reference level first) and each covariate; no intercept."""
    t = critical_value(fit.df)
    p = p_values(fit.coef / fit.se, fit.df)
    everyone = np.ones(len(matrix.y), bool)
    rows = []
    by_term: dict[str, list[int]] = {}
    for j, col in enumerate(matrix.columns):
        if col.role != "intercept":
            by_term.setdefault(col.term, []).append(j)
    codings = {c.column: c for c in matrix.codings}
    for term, indices in by_term.items():
        coding = codings[term]
        role = matrix.columns[indices[0]].role
        per = coding.per if coding.kind == "continuous" else np.nan
        if coding.kind != "continuous":
            if term == spec.exposure:
                mask = matrix.level_index == 0
            else:  # covariate reference: rows where every indicator is 0
                mask = np.all(matrix.x[:, indices] == 0, axis=1)
            n, cases = _counts(matrix, mask)
            rows.append(dict(term=term, level=coding.levels[0], role=role, per=per,
                             odds_ratio=1.0, n=n, cases=cases, log_odds_ratio=0.0))
        for j in indices:
            scale = coding.per if coding.kind == "continuous" else 1.0
            b, se = fit.coef[j] * scale, fit.se[j] * scale
            level = matrix.columns[j].level
            mask = matrix.x[:, j] == 1 if level else everyone
            n, cases = _counts(matrix, mask)
            ratios = dict(odds_ratio=np.nan, ci_lower=np.nan, ci_upper=np.nan)
            if not fit.flag:  # a flagged fit's numbers are never exponentiated or shown
                ratios = dict(odds_ratio=np.exp(b), ci_lower=np.exp(b - t * se),
                              ci_upper=np.exp(b + t * se))
            rows.append(dict(term=term, level=level, role=role, per=per, **ratios,
                             p_value=p[j], n=n, cases=cases, log_odds_ratio=b, se=se))
    frame = pd.DataFrame(rows)
    frame.insert(0, "model", spec.name)
    frame["df"] = fit.df if fit.df is not None else np.nan
    exposure = frame["term"] == spec.exposure
    frame["p_trend"] = np.where(exposure, np.nan if p_trend is None else p_trend, np.nan)
    frame["p_joint"] = np.where(exposure, np.nan if p_joint is None else p_joint, np.nan)
    frame["flag"] = fit.flag
    if fit.flag:  # never print absurd numbers: blank the estimates of a flagged fit
        blank = ["odds_ratio", "ci_lower", "ci_upper", "p_value", "log_odds_ratio", "se",
                 "p_trend", "p_joint"]
        frame[blank] = np.nan
    return frame.reindex(columns=COLUMNS)
