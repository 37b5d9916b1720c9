"""Plain water and total fluid from the day-1 total nutrient intakes file (`DR1TOT_x`).

| column | from | rule |
| --- | --- | --- |
| water_l_day | DR1_320Z | total plain water drunk yesterday, g -> l (1 g ≈ 1 ml) [DR-CB][CODE-DR] |
| tap_water_l_day | DR1_330Z | tap water, g -> l [DR-CB][CODE-DR] |
| bottled_water_l_day | DR1BWATZ | bottled water, g -> l [DR-CB][CODE-DR] |
| moisture_l_day | DR1TMOIS | water in all foods and drinks, g -> l [DR-CB][SEB12] |
| total_fluid_l_day | DR1TMOIS (+ DR1_320Z, see below) | all water taken in, counted once |

Only recalls with status `DR1DRSTZ` = 1 (reliable, met the minimum criteria) are used; for
everyone else the intake columns are missing. Code 4 (reported breast milk) is missing too,
since breast-milk amounts are not in the totals (memory) [DR-CB].

No double counting. "Moisture" is water from all sources, plain water included, since
drinking water became part of the 24-hour recall in 2005–2006 [SEB12]; but the 1999–2000
totals excluded plain water [DRXTOT99], so each cycle is checked: if moisture is below plain
water (by more than 1 g) in more than 1% of recalls with any plain water, that cycle's moisture
evidently leaves plain water out, and total fluid is moisture + plain water there; otherwise
total fluid is moisture alone. The rule applied and its counts are recorded per cycle
(the 1 g and 1% margins are ours: common practice, no source).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

USABLE_STATUS = 1.0          # DR1DRSTZ: 1 reliable and met minimum criteria [DR-CB]
REQUIRED = ("DR1DRSTZ", "DR1_320Z", "DR1TMOIS")
OPTIONAL = {"tap_water_l_day": "DR1_330Z", "bottled_water_l_day": "DR1BWATZ"}
MARGIN_G = 1.0
SHARE = 0.01


def usable(raw: pd.DataFrame) -> pd.Series:
    """Rows with a usable day-1 recall (the people the beverage columns describe)."""
    return raw["DR1DRSTZ"] == USABLE_STATUS


def fluids(raw: pd.DataFrame, cycle: str, file: str) -> tuple[pd.DataFrame, dict, list[str]]:
    """The fluid columns for every row of `raw` (the totals file merged on demographics)."""
    ok = usable(raw)

    def litres(variable: str) -> pd.Series:
        return (raw[variable] / 1000.0).where(ok)

    water, moisture = litres("DR1_320Z"), litres("DR1TMOIS")
    out = pd.DataFrame({"water_l_day": water}, index=raw.index)
    notes = []
    for column, variable in OPTIONAL.items():
        if variable in raw:
            out[column] = litres(variable)
        else:
            out[column] = np.nan
            notes.append(f"{file} has no {variable}, so `{column}` is missing for {cycle}.")
    out["moisture_l_day"] = moisture

    grams_water, grams_moisture = raw["DR1_320Z"].where(ok), raw["DR1TMOIS"].where(ok)
    drank = grams_water > 0
    below = int((grams_moisture + MARGIN_G < grams_water)[drank].sum())
    with_water = int(drank.sum())
    includes = with_water == 0 or below <= SHARE * with_water
    out["total_fluid_l_day"] = moisture if includes else moisture + water
    status = raw["DR1DRSTZ"].map(lambda v: "missing" if pd.isna(v) else f"{v:g}")
    record = {
        "cycle": cycle, "file": file,
        "recall_status": {k: int(v) for k, v in status.value_counts().sort_index().items()},
        "usable_recalls": int(ok.sum()),
        "recalls_with_plain_water": with_water,
        "recalls_with_moisture_below_plain_water": below,
        "moisture_includes_plain_water": bool(includes),
        "total_fluid": "DR1TMOIS / 1000" if includes else "(DR1TMOIS + DR1_320Z) / 1000",
    }
    return out, record, notes
