"""Sources: the invented demo survey and the user's own parquet/CSV table."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import cohortstone
from cohortstone.errors import DataError
from cohortstone.sources import demo

MODEL = {"name": "m", "outcome": "stone_ever", "exposure": "water_l_day", "cuts": [0.5, 1.5],
         "adjust": ["age_years", "sex", "bmi"]}
DESIGN = {"weight": "weight", "strata": "strata", "cluster": "psu"}


def test_the_demo_survey_is_deterministic_and_shaped_as_promised():
    a, b = demo.load(), demo.load()
    pd.testing.assert_frame_equal(a, b)
    assert 7500 <= len(a) <= 8500
    clusters = a.groupby("strata")["psu"].nunique()
    assert len(clusters) == 15 and set(clusters) == {2, 3}
    assert a["weight"].std() > 0.3 * a["weight"].mean(), "weights are unequal"
    assert a.loc[a["age_years"] < 20, "stone_ever"].isna().all(), "asked of adults only"
    assert set(a["stone_ever"].dropna()) == {0.0, 1.0}
    assert a["age_years"].max() == 80, "top-coded like the public survey files"
    for column in ["water_l_day", "coffee_ml_day", "tea_ml_day", "soft_drink_ml_day",
                   "diet_drink_ml_day", "citrus_juice_ml_day", "milk_ml_day", "sex", "bmi",
                   "diabetes"]:
        assert column in a.columns
    assert "invented" in demo.LABEL


@pytest.mark.parametrize("suffix", ["parquet", "csv"])
def test_a_users_own_table_runs_exactly_like_the_demo(suffix, tmp_path):
    raw = demo.load().rename(columns={"age_years": "AGE", "weight": "WTINT"})
    path = tmp_path / f"mine.{suffix}"
    raw.to_parquet(path) if suffix == "parquet" else raw.to_csv(path, index=False)
    before = path.read_bytes()
    own = {"name": "own", "population": ["age_years >= 20"], "models": [MODEL],
           "data": {"source": "table", "path": str(path),
                    "rename": {"AGE": "age_years", "WTINT": "weight"}},
           "design": DESIGN}
    builtin = {**own, "data": {"source": "demo"}}
    mine = cohortstone.run(own, write=False).odds_ratios
    reference = cohortstone.run(builtin, write=False).odds_ratios
    np.testing.assert_allclose(mine["log_odds_ratio"], reference["log_odds_ratio"], rtol=1e-9)
    np.testing.assert_allclose(mine["se"].dropna(), reference["se"].dropna(), rtol=1e-9)
    assert path.read_bytes() == before, "the input file is never modified"


def test_renaming_a_column_the_table_lacks_is_a_data_error(tmp_path):
    path = tmp_path / "mine.csv"
    demo.load().to_csv(path, index=False)
    config = {"name": "own", "models": [MODEL],
              "data": {"source": "table", "path": str(path), "rename": {"AGE": "age_years"}}}
    with pytest.raises(DataError, match="data.rename names column"):
        cohortstone.run(config, write=False)
