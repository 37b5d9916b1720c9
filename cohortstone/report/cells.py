"""Small-cell protection for published tables.

Counts from 1 up to one below the threshold (default 11: counts of 1–10 withheld, as is
common practice in public-health publishing; common practice, no source) are replaced by
the text `<11`. Zero is shown: it describes nobody. Weighted totals and estimates are not
counts of people and stay; estimates resting on tiny counts are handled by the reliability
rules instead.
"""
from __future__ import annotations

import pandas as pd

DEFAULT_THRESHOLD = 11

# the count columns of each published table
COUNT_COLUMNS = {
    "odds_ratios": ("n", "cases"),
    "prevalence": ("n", "cases"),
    "table1": ("n", "missing"),
    "flow": ("People",),
}


def is_small(value: object, threshold: int) -> bool:
    return isinstance(value, (int, float)) and not pd.isna(value) and 0 < abs(value) < threshold


def protect(frame: pd.DataFrame, columns: tuple[str, ...], threshold: int) -> pd.DataFrame:
    """A copy with small counts in `columns` written as `<threshold`."""
    out = frame.copy()
    for column in columns:
        if column not in out.columns:
            continue
        values = out[column]
        small = values.map(lambda v: is_small(v, threshold))
        if small.any():
            shown = values.astype(object)
            shown[small] = f"<{threshold}"
            shown[~small] = [_whole(v) for v in values[~small]]
            out[column] = shown
    return out


def _whole(value: object) -> object:
    if isinstance(value, float) and not pd.isna(value) and value.is_integer():
        return int(value)
    return value


def rule_text(threshold: int) -> str:
    return (f"Counts of 1 to {threshold - 1} people are shown as \u201c<{threshold}\u201d in every "
            "published table to protect privacy; zero is shown as it is.")
