"""The weighted descriptive table (Table 1) of the analysis population.

Continuous columns: weighted mean with its design-based SE; categorical columns (text, or
numeric codes listed as categorical): weighted percentage of each level with its SE. Each
estimate sits beside its unweighted n, and every column reports how many people lack it.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import DescribeSpec
from cohortstone.design import Design
from cohortstone.columns import require
from cohortstone.exposure import level_text
from cohortstone.means import domain_mean
from cohortstone.prevalence import levels

COLUMNS = ["column", "level", "by", "group", "statistic", "estimate", "se", "n", "missing"]


def _is_categorical(series: pd.Series, column: str, spec: DescribeSpec) -> bool:
    numeric = pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)
    return column in spec.categorical or not numeric


def _rows_for(frame: pd.DataFrame, column: str, spec: DescribeSpec, design: Design,
              group_mask: np.ndarray, by: str, group: str) -> list[dict]:
    series = frame[column]
    present = series.notna().to_numpy()
    domain = group_mask & present
    missing = int((group_mask & ~present).sum())
    common = {"column": column, "by": by, "group": group, "missing": missing}
    if not domain.any():
        return [common | {"level": "", "statistic": "", "estimate": np.nan, "se": np.nan,
                          "n": 0}]
    if not _is_categorical(series, column, spec):
        m = domain_mean(design, series.to_numpy(dtype=float, na_value=0.0), domain)
        return [common | {"level": "", "statistic": "mean", "estimate": m.estimate,
                          "se": m.se, "n": m.n}]
    out = []
    for level in levels(series, group_mask):
        is_level = (series == level).to_numpy(dtype=float)
        m = domain_mean(design, is_level, domain)
        out.append(common | {"level": level_text(level), "statistic": "percent",
                             "estimate": 100 * m.estimate, "se": 100 * m.se,
                             "n": int((domain & (is_level == 1)).sum())})
    return out


def validate(frame: pd.DataFrame, spec: DescribeSpec) -> None:
    """Every column the block names must be in the data."""
    require(frame, [*[("describe.columns", c) for c in spec.columns],
                    *([("describe.by", spec.by)] if spec.by else [])])


def table(frame: pd.DataFrame, spec: DescribeSpec, population: np.ndarray,
          design: Design) -> pd.DataFrame:
    """Tidy Table 1: one row per column (and level) per group, overall group first."""
    validate(frame, spec)
    base = population & (design.weight > 0)
    groups = [("all", "all", base)]
    if spec.by:
        series = frame[spec.by]
        groups += [(spec.by, level_text(level), base & (series == level).to_numpy())
                   for level in levels(series, base)]
    rows = []
    for column in spec.columns:
        for by, group, mask in groups:
            rows += _rows_for(frame, column, spec, design, mask, by, group)
    return pd.DataFrame(rows).reindex(columns=COLUMNS)
