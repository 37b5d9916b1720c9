"""The analysis population (domain): conditions -> a boolean column; rows are never dropped."""
from __future__ import annotations

import difflib

import numpy as np
import pandas as pd

from cohortstone.config.conditions import Condition, evaluate
from cohortstone.errors import DataError


def suggest(column: str, frame: pd.DataFrame) -> str:
    """' Did you mean `x`?' for a misspelt column, else a short list of what there is."""
    names = [str(c) for c in frame.columns]
    close = difflib.get_close_matches(column, names, n=1, cutoff=0.6)
    if close:
        return f" Did you mean `{close[0]}`?"
    shown = ", ".join(names[:30]) + (", …" if len(names) > 30 else "")
    return f" The data's columns are: {shown}."


def domain(frame: pd.DataFrame, conditions: tuple[Condition, ...]) -> tuple[np.ndarray, list]:
    """Rows meeting every condition, and the count remaining after each condition (a flow)."""
    for cond in conditions:
        for column in cond.columns():
            if column not in frame.columns:
                raise DataError(f"population condition `{cond.text}`: column `{column}` is not "
                                f"in the data.{suggest(column, frame)}")
    mask = np.ones(len(frame), bool)
    flow = []
    for cond in conditions:
        mask &= evaluate(cond, frame)
        flow.append({"step": cond.text, "remaining": int(mask.sum())})
    if conditions and not mask.any():
        raise DataError(
            "population: the conditions select nobody (" + "; ".join(
                f"after `{f['step']}`: {f['remaining']} rows" for f in flow)
            + f", of {len(frame)} read). Check the values and units the conditions compare with."
        )
    return mask, flow
