"""The analysis population (domain): conditions -> a boolean column; rows are never dropped."""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.columns import require
from cohortstone.config.conditions import Condition, evaluate
from cohortstone.errors import DataError


def domain(frame: pd.DataFrame, conditions: tuple[Condition, ...]) -> tuple[np.ndarray, list]:
    """Rows meeting every condition, and the count remaining after each condition (a flow)."""
    for cond in conditions:
        require(frame, [(f"population condition `{cond.text}`", c) for c in cond.columns()])
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
