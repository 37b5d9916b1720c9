"""Recodes of the `nhanes` source on small hand-made tables (all values INVENTED).

Codes from the codebooks cited in domain.md §1 and §3: KIQ026/KIQ029 1 yes, 2 no, 7 refused,
9 don't know [CB-E…CB-P]; KID028 counts with 777 refused, 999 don't know [CB-E…CB-H]; KIQ029
and KID028 are asked only when KIQ026 = 1 [CB-I][CB-E]; age top-coded at 80 [OSQ-J]; DR1DRSTZ 1
is a reliable recall [DR-CB]; moisture includes plain water from 2005–2006 on [SEB12].
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cohortstone.errors import ConfigError
from cohortstone.sources.nhanes import fluids, foods, recode
from cohortstone.sources.nhanes.files import read_xpt

pyreadstat = pytest.importorskip("pyreadstat")
NA = np.nan


def test_stone_ever_refused_and_dont_know_become_missing_and_are_counted():
    raw = pd.DataFrame({"SEQN": [1., 2, 3, 4, 5, 6], "KIQ026": [1., 2, 7, 9, 9, NA],
                        "KIQ029": [1., NA, NA, NA, NA, NA]})
    out, counts = recode.stones(raw, "2015-2016")
    assert out["stone_ever"].tolist() == pytest.approx([1, 0, NA, NA, NA, NA], nan_ok=True)
    codes = {(c["variable"], c["code"]): c["rows"] for c in counts}
    assert codes[("KIQ026", 7)] == 1 and codes[("KIQ026", 9)] == 2
    assert all(c["cycle"] == "2015-2016" for c in counts)


def test_past_year_passage_follows_the_skip_pattern():
    # KIQ029 is asked only when KIQ026 = 1: never had a stone -> did not pass one this year
    raw = pd.DataFrame({"SEQN": [1., 2, 3, 4, 5, 6], "KIQ026": [1., 1, 1, 2, 9, 1],
                        "KIQ029": [1., 2, 9, NA, NA, 7]})
    out, counts = recode.stones(raw, "2017-2020")
    assert out["stone_past_year"].tolist() == pytest.approx([1, 0, NA, 0, NA, NA], nan_ok=True)
    filled = [c for c in counts if c["code"] == "not asked"]
    assert filled == [{"cycle": "2017-2020", "variable": "KIQ029", "column": "stone_past_year",
                       "code": "not asked", "meaning": "KIQ026 = 2 (never had a stone), so 0",
                       "rows": 1}]
    assert out["stone_passed_count"].isna().all(), "KID028 ended in 2013-2014 [CB-I]"


def test_passed_count_drops_777_and_999_and_is_zero_for_people_without_stones():
    raw = pd.DataFrame({"SEQN": [1., 2, 3, 4, 5], "KIQ026": [1., 1, 1, 2, 1],
                        "KID028": [3., 777, 999, NA, 0]})
    out, counts = recode.stones(raw, "2009-2010")
    assert out["stone_passed_count"].tolist() == pytest.approx([3, NA, NA, 0, 0], nan_ok=True)
    codes = {(c["variable"], c["code"]): c["rows"] for c in counts}
    assert codes[("KID028", 777)] == 1 and codes[("KID028", 999)] == 1
    assert out["stone_past_year"].isna().all(), "KIQ029 starts in 2015-2016 [CB-I]"
    answers = recode.stone_answers(raw)
    assert answers["KID028"] == {"answered": 2, "777": 1, "999": 1, "missing": 1}
    assert answers["KIQ026"] == {"1": 4, "2": 1, "missing": 0}


def test_diabetes_counts_borderline_as_no_and_says_how_many():
    raw = pd.DataFrame({"SEQN": [1., 2, 3, 4, 5], "DIQ010": [1., 2, 3, 7, 9]})
    out, counts = recode.diabetes(raw, "2011-2012")
    assert out.tolist() == pytest.approx([1, 0, 0, NA, NA], nan_ok=True)
    assert {c["code"]: c["rows"] for c in counts} == {7: 1, 9: 1, 3: 1}


def test_demographics_top_code_age_and_name_sex_and_race():
    raw = pd.DataFrame({"SEQN": [10., 11, 12], "RIDAGEYR": [85., 80, 34],
                        "RIAGENDR": [1., 2, 1], "RIDRETH1": [3., 4, 1]})
    out, age = recode.demographics(raw, "2007-2008")
    assert out["age_years"].tolist() == [80, 80, 34]
    assert age["rows_at_top_code"] == 2
    assert out["sex"].tolist() == ["male", "female", "male"]
    assert out["race_ethnicity"].tolist() == ["white", "black", "mexican_american"]
    assert out["person_id"].dtype == np.int64


def test_transport_format_zeros_read_back_as_exact_zeros(tmp_path):
    path = tmp_path / "DR1TOT_I.xpt"
    pyreadstat.write_xport(pd.DataFrame({"SEQN": [1., 2.], "DR1_320Z": [0.0, 250.0]}),
                           str(path), file_format_version=5, table_name="DR1TOT_I")
    artefact = pd.read_sas(path, format="xport")["DR1_320Z"].iloc[0]
    assert 0 < artefact < 1e-70, "pandas' reader gives the IBM-float artefact (the reason)"
    assert read_xpt(path)["DR1_320Z"].tolist() == [0.0, 250.0]


def totals(water, moisture, status=None):
    n = len(water)
    return pd.DataFrame({"SEQN": np.arange(n, dtype=float),
                         "DR1DRSTZ": status if status is not None else [1.0] * n,
                         "DR1_320Z": water, "DR1_330Z": water, "DR1BWATZ": [0.0] * n,
                         "DR1TMOIS": moisture})


def test_total_fluid_is_moisture_when_moisture_already_holds_plain_water():
    raw = totals([1000., 0, 500, 2000], [3000., 1800, 2600, 2100])
    out, record, _ = fluids.fluids(raw, "2015-2016", "DR1TOT_I.xpt")
    assert out["water_l_day"].tolist() == [1.0, 0.0, 0.5, 2.0]
    assert out["total_fluid_l_day"].tolist() == [3.0, 1.8, 2.6, 2.1], "no double counting"
    assert record["moisture_includes_plain_water"] is True
    assert record["total_fluid"] == "DR1TMOIS / 1000"


def test_plain_water_is_added_where_a_cycles_moisture_evidently_leaves_it_out():
    # moisture below plain water in 2 of 3 recalls with water: it cannot include it
    raw = totals([1500., 2000, 300, 0], [900., 1200, 1400, 700])
    out, record, _ = fluids.fluids(raw, "2007-2008", "DR1TOT_E.xpt")
    assert out["total_fluid_l_day"].tolist() == pytest.approx([2.4, 3.2, 1.7, 0.7])
    assert record["moisture_includes_plain_water"] is False
    assert record["recalls_with_moisture_below_plain_water"] == 2


def test_intake_is_missing_without_a_reliable_recall():
    raw = totals([1000., 800, 600, 900], [2000., 2000, 2000, 2000], status=[1., 2, 4, NA])
    out, record, _ = fluids.fluids(raw, "2013-2014", "DR1TOT_H.xpt")
    assert out["water_l_day"].tolist() == pytest.approx([1.0, NA, NA, NA], nan_ok=True)
    assert record["usable_recalls"] == 1
    assert record["recall_status"] == {"1": 1, "2": 1, "4": 1, "missing": 1}


def food_rows():
    # (SEQN, food code, grams, kcal) — invented
    rows = [(1, 61201020, 200, 78), (1, 61210220, 250, 112), (1, 61204000, 20, 4),
            (1, 92410310, 355, 146), (1, 92410320, 355, 1.4), (1, 11411100, 170, 107),
            (1, 93101000, 355, 153), (1, 93401010, 150, 125), (2, 51000100, 60, 160)]
    return pd.DataFrame(rows, columns=["SEQN", "DR1IFDCD", "DR1IGRMS", "DR1IKCAL"]).astype(float)


def test_beverages_split_citrus_by_food_code_and_diet_drinks_by_energy():
    people = pd.Series([1., 2., 3.])
    usable = pd.Series([True, True, False])
    out, record = foods.beverages(food_rows(), people, usable, foods.load_map())
    row = out.iloc[0]
    assert row["grapefruit_juice_ml_day"] == 200 and row["orange_juice_ml_day"] == 250
    assert row["other_citrus_juice_ml_day"] == 20 and row["citrus_juice_ml_day"] == 470
    assert row["soft_drink_ml_day"] == 355 and row["diet_drink_ml_day"] == 355
    assert row["milk_ml_day"] == 0, "yogurt is carved out of the milk codes"
    assert row["alcohol_ml_day"] == 505 and row["beer_ml_day"] == 355
    assert (out.iloc[1] == 0).all(), "a usable recall with no drinks is 0 in every group"
    assert out.iloc[2].isna().all(), "no usable recall: missing"
    assert record["rows_not_placed"] == 2


def test_every_row_of_the_shipped_map_names_its_source():
    food_map = foods.load_map()
    assert all(r.source.strip() for r in food_map.rows)
    assert {"orange_juice", "grapefruit_juice", "other_citrus_juice", "other_juice", "coffee",
            "tea", "soft_drink", "fruit_drink", "diet_drink", "milk", "beer", "wine", "liquor",
            "plain_water"} <= set(food_map.groups())


def test_a_users_own_map_replaces_the_shipped_one(tmp_path):
    own = tmp_path / "my_foods.yaml"
    own.write_text("diet: {kcal_per_100g_at_most: 5, source: my rule}\n"
                   "rows:\n"
                   "  - {prefix: '61201', group: grapefruit, what: gf, source: my list}\n"
                   "  - {prefix: '924', group: soda, diet_group: diet_soda, what: s, "
                   "source: my list}\n")
    food_map = foods.load_map(own)
    assert food_map.columns() == ["grapefruit_ml_day", "soda_ml_day", "diet_soda_ml_day"]
    out, _ = foods.beverages(food_rows(), pd.Series([1.]), pd.Series([True]), food_map)
    assert out.iloc[0].tolist() == [200, 355, 355]


def test_a_faulty_map_is_refused_with_every_fault_and_its_line(tmp_path):
    bad = tmp_path / "bad_foods.yaml"
    bad.write_text("diet: {kcal_per_100g_at_most: -1, source: x}\n"
                   "rows:\n"
                   "  - {prefix: '61A', group: juice, what: j, source: s}\n"
                   "  - {prefix: '924', group: Soda, what: s, source: s}\n"
                   "  - {prefix: '921', group: coffee, what: c}\n"
                   "sums: {drinks: [coffee, beer]}\n")
    with pytest.raises(ConfigError) as caught:
        foods.load_map(bad)
    text = str(caught.value)
    assert "5 problems" in text
    assert "key `diet.kcal_per_100g_at_most` (line 1)" in text
    assert "key `rows[0].prefix` (line 3)" in text
    assert "key `rows[1].group` (line 4)" in text
    assert "key `rows[2].source` (line 5)" in text
    assert "key `sums.drinks` (line 6)" in text
