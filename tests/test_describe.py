"""Table 1: weighted means and percentages beside unweighted counts and missing counts."""
from __future__ import annotations

import pytest

import cohortstone

CONFIG = {"name": "t1", "data": {"source": "demo"}, "population": ["age_years >= 20"],
          "design": {"weight": "weight", "strata": "strata", "cluster": "psu"},
          "describe": {"columns": ["bmi", "sex", "diabetes"], "by": "stone_ever",
                       "categorical": ["diabetes"]}}


@pytest.fixture(scope="module")
def table1():
    return cohortstone.run(CONFIG, write=False).table1


def test_groups_are_everyone_then_each_level_of_by(table1):
    assert list(dict.fromkeys(table1["group"])) == ["all", "0", "1"]
    assert set(table1.loc[table1["group"] != "all", "by"]) == {"stone_ever"}


def test_continuous_columns_give_a_mean_and_count_their_missing(table1):
    bmi = table1[(table1["column"] == "bmi") & (table1["group"] == "all")].iloc[0]
    assert bmi["statistic"] == "mean" and 15 < bmi["estimate"] < 45 and bmi["se"] > 0
    assert bmi["missing"] == 204 and bmi["n"] == 6463 - 204


def test_categorical_percentages_sum_to_100_within_each_group(table1):
    for column in ["sex", "diabetes"]:
        rows = table1[table1["column"] == column]
        assert rows["statistic"].eq("percent").all()
        sums = rows.groupby("group")["estimate"].sum()
        assert sums.to_numpy() == pytest.approx([100.0] * len(sums))
    assert set(table1.loc[table1["column"] == "diabetes", "level"]) == {"0", "1"}


def test_unweighted_counts_of_levels_add_up_to_the_group(table1):
    sex = table1[(table1["column"] == "sex") & (table1["group"] == "all")]
    assert sex["n"].sum() == 6463
