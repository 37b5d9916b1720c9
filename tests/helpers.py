"""Small shared test helpers: data files for the bad-input configs."""
from __future__ import annotations

from pathlib import Path

import pandas as pd

from cohortstone.sources.demo import load


def write_bad_inputs(folder: Path) -> None:
    """The demo survey, and variants with one fault each, as CSV files in `folder`."""
    survey = load()
    survey.to_csv(folder / "survey.csv", index=False)
    codes = survey.copy()
    codes["stone_ever"] = codes["stone_ever"].map({1.0: 1, 0.0: 2})  # survey answer codes
    codes.to_csv(folder / "answer_codes.csv", index=False)
    negative = survey.copy()
    negative.loc[5, "weight"] = -1.0
    negative.to_csv(folder / "negative_weight.csv", index=False)
    missing = survey.copy()
    missing.loc[7, "weight"] = None
    missing.to_csv(folder / "missing_weight.csv", index=False)
    lonely = survey.copy()
    lonely.loc[lonely["strata"] == 4, "psu"] = 1
    lonely.to_csv(folder / "single_cluster.csv", index=False)


def folder_listing(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def read_csv(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, keep_default_na=True)
