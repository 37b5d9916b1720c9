"""Proportional-hazards check per term: the test behind scaled Schoenfeld residual plots.

For each term the hypothesis "its log hazard ratio does not change with time" is tested by
the score test of adding x·g(t) at the fitted β (Grambsch & Therneau, Biometrika 1994;
Therneau & Grambsch 2000, §6.2), with g(t) = 1 − S(t−), the Kaplan–Meier estimate of the
share of rows that have had an event just before t, centred on its mean over the events. At
γ = 0 the score of γ is Σₖ gₖ (Σ events xᵢ − Σₗ x̄ₖₗ) (the Schoenfeld residuals weighted by
g) and the information of (β, γ) has blocks Σₖ Iₖ, Σₖ gₖ Iₖ and Σₖ gₖ² Iₖ, each one weighted
Gram matrix (see `cox.information`). A term with several columns (a grouped exposure) is
tested jointly; the global test takes every column at once.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from cohortstone.models import cox

LEVEL = 0.05
COLUMNS = ["model", "outcome", "term", "chi_square", "df", "p_value", "verdict"]


def km_before(rs: cox.RiskSets) -> np.ndarray:
    """Kaplan–Meier S(τₖ−) of all rows at each event time (risk sets with entry times)."""
    at_risk = cox.at_risk_sums(np.ones(len(rs.exit_bin)), rs)
    factors = 1 - rs.deaths / at_risk
    return np.concatenate([[1.0], np.cumprod(factors)[:-1]])


def statistics(x: np.ndarray, stop: np.ndarray, event: np.ndarray, start: np.ndarray | None,
               beta: np.ndarray, terms: dict[str, list[int]]) -> list[tuple[str, float, int]]:
    """(term, chi-square, df) per term and `GLOBAL`, at the fitted `beta`."""
    event = np.asarray(event) != 0
    rs = cox.risk_sets(stop, event, start)
    centred = x - x.mean(axis=0)
    state = cox.evaluate(centred, beta, rs)
    transformed = 1 - km_before(rs)
    g = transformed - np.sum(rs.deaths * transformed) / rs.deaths.sum()
    p = x.shape[1]
    u = centred[event].T @ g[rs.event_bin] - state.xbar.T @ g[rs.slot_time]
    blocks = [cox.information(centred, state, rs, w) for w in (None, g, g * g)]
    imat = np.block([[blocks[0], blocks[1]], [blocks[1], blocks[2]]])
    full = np.concatenate([np.zeros(p), u])
    out = []
    for term, columns in [*terms.items(), ("GLOBAL", list(range(p)))]:
        keep = list(range(p)) + [p + j for j in columns]
        part = full[keep]
        chi = float(part @ np.linalg.solve(imat[np.ix_(keep, keep)], part))
        out.append((term, chi, len(columns)))
    return out


def verdict(p_value: float) -> str:
    if not np.isfinite(p_value):
        return "not tested"
    if p_value < LEVEL:
        return ("hazards may not be proportional (p < 0.05): the hazard ratio may change "
                "over follow-up, so read it as an average over time")
    return "no evidence against proportional hazards (p >= 0.05)"


def table(model: str, outcome: str, stats_rows: list[tuple[str, float, int]]) -> pd.DataFrame:
    rows = []
    for term, chi, df in stats_rows:
        p_value = float(stats.chi2.sf(chi, df))
        rows.append({"model": model, "outcome": outcome, "term": term, "chi_square": chi,
                     "df": df, "p_value": p_value, "verdict": verdict(p_value)})
    return pd.DataFrame(rows, columns=COLUMNS)
