"""The `derive` block: new columns made right after loading (groups by cut points, unit changes)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import DeriveSpec
from cohortstone.columns import require
from cohortstone.errors import DataError


def group_labels(cuts: tuple[float, ...]) -> list[str]:
    """Labels for groups [c0,c1), [c1,c2), …, [ck, ∞): `20-39`, `40-59`, `60+` for whole cuts."""
    def fmt(x: float) -> str:
        return f"{x:g}"
    whole = all(float(c).is_integer() for c in cuts)
    labels = []
    for lo, hi in zip(cuts, cuts[1:]):
        if whole:
            labels.append(fmt(lo) if hi - lo == 1 else f"{fmt(lo)}-{fmt(hi - 1)}")
        else:
            labels.append(f"{fmt(lo)}-<{fmt(hi)}")
    labels.append(f"{fmt(cuts[-1])}+")
    return labels


def apply_derive(frame: pd.DataFrame, rules: tuple[DeriveSpec, ...]) -> pd.DataFrame:
    """Return a copy of `frame` with the derived columns added, in config order."""
    if not rules:
        return frame
    frame = frame.copy()
    for rule in rules:
        require(frame, [(f"derive.{rule.name}.from", rule.source_column)])
        source = frame[rule.source_column]
        if not pd.api.types.is_numeric_dtype(source):
            raise DataError(f"derive.{rule.name}: column `{rule.source_column}` must hold "
                            f"numbers, found text such as {source.dropna().iloc[0]!r}.")
        values = source.to_numpy(dtype=float)
        if rule.times is not None:
            frame[rule.name] = values * rule.times
            continue
        cuts = np.asarray(rule.cuts, dtype=float)
        index = np.searchsorted(cuts, values, side="right") - 1  # below the first cut: -1
        labels = np.asarray(group_labels(rule.cuts), dtype=object)
        keep = (index >= 0) & ~np.isnan(values)
        out = np.full(len(values), None, dtype=object)
        out[keep] = labels[index[keep]]
        frame[rule.name] = pd.Categorical(out, categories=list(labels), ordered=True)
    return frame
