"""Year-on-year comparison with a previous report folder: what changed, and by how much.

Every estimate present in both runs is listed with its old and new value. A change "exceeds
what the intervals allow" when |new − old| / √(se_old² + se_new²) > 1.96, the usual test of
two independent estimates (common practice, no source; it is conservative when the two runs
share data, e.g. a rerun with one more survey cycle). Ratios are compared on the log scale.
Rows present in only one run are listed as `new` or `vanished`.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from cohortstone.errors import DataError

Z = 1.959963984540054
COLUMNS = ["table", "key", "quantity", "old", "new", "difference", "z", "beyond_intervals",
           "status"]

# table -> (file in the report folder, key columns, value column, se column, log scale?)
TABLES = {
    "odds_ratios": ("odds_ratios.csv", ("model", "term", "level"), "log_odds_ratio", "se",
                    True),
    "prevalence": ("prevalence_full.csv", ("by", "group"), "prevalence", "se", False),
    "adjusted_prevalence": ("prevalence_full.csv", ("by", "group"), "adjusted_prevalence",
                            "adjusted_se", False),
    "table1": ("table1.csv", ("column", "level", "by", "group"), "estimate", "se", False),
    "hazard_ratios": ("hazard_ratios.csv", ("model", "outcome", "term", "level"),
                      "log_hazard_ratio", "se", True),
}


def _read(folder: Path, name: str) -> pd.DataFrame | None:
    path = folder / name
    if not path.is_file():
        return None
    return pd.read_csv(path, keep_default_na=False, na_values=[""], dtype={"level": str,
                                                                           "group": str})


def _keys(frame: pd.DataFrame, columns: tuple[str, ...]) -> pd.Series:
    return frame[list(columns)].fillna("").astype(str).agg(" | ".join, axis=1)


def _compare(table: str, old: pd.DataFrame, new: pd.DataFrame) -> list[dict]:
    _, key_cols, value, se, log = TABLES[table]
    if value not in old.columns or value not in new.columns:
        return []
    old = old.assign(_key=_keys(old, key_cols)).set_index("_key")
    new = new.assign(_key=_keys(new, key_cols)).set_index("_key")
    rows = []
    for key in new.index.union(old.index, sort=False):
        status = "both" if key in old.index and key in new.index else (
            "new" if key in new.index else "vanished")
        a = float(old.at[key, value]) if key in old.index else np.nan
        b = float(new.at[key, value]) if key in new.index else np.nan
        sa = float(old.at[key, se]) if key in old.index else np.nan
        sb = float(new.at[key, se]) if key in new.index else np.nan
        if status == "both" and np.isnan(a) and np.isnan(b):
            continue
        spread = np.hypot(sa, sb)
        z = (b - a) / spread if spread > 0 else np.nan
        shown = (np.exp(a), np.exp(b)) if log else (a, b)
        rows.append({"table": table, "key": key,
                     "quantity": value.removeprefix("log_") if log else value,
                     "old": shown[0],
                     "new": shown[1], "difference": b - a, "z": z,
                     "beyond_intervals": bool(abs(z) > Z) if np.isfinite(z) else False,
                     "status": status})
    return rows


def changes(previous: Path, current: dict[str, pd.DataFrame | None]) -> pd.DataFrame:
    """Compare this run's frames (by table name) with the files of a previous report folder."""
    previous = Path(previous)
    if not previous.is_dir() or not (previous / "manifest.json").is_file():
        raise DataError(f"--compare: {str(previous)!r} is not a cohortstone report folder (it "
                        "should hold the manifest.json of an earlier run).")
    rows: list[dict] = []
    for table, (name, *_rest) in TABLES.items():
        frame = current.get(table.replace("adjusted_", ""))
        old = _read(previous, name)
        if frame is None or old is None:
            continue
        rows += _compare(table, old, frame)
    return pd.DataFrame(rows, columns=COLUMNS)
