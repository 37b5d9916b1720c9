"""The `nhanes` source checked against R: the same transport files merged independently in R.

Each case writes INVENTED files in the public layout (tests/sources/test_nhanes_layout.py),
then
1. merges, recodes and weights them with cohortstone and with
   tests/reference/nhanes/merge.R (base R; `foreign::read.xport` reads the files; the rules
   restated there from domain.md), and compares every column of the two tables;
2. fits the same design-based logistic model with cohortstone (`source: nhanes`, no `design`
   block: weight, strata and cluster come from the files) and with R's survey package
   (Lumley) through tests/reference/svyglm/fit.R on R's own merged table, and compares
   coefficients, standard errors (relative 1e-6) and design degrees of freedom.
"""
from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import cohortstone
from cohortstone.sources.nhanes.foods import load_map
from tests.models.test_logistic_against_R import assert_table_matches, fit_in_R, r_name
from test_nhanes_layout import write_survey

MERGE_R = Path(__file__).resolve().parents[1] / "reference" / "nhanes" / "merge.R"

CASES = {
    # two regular cycles, day-1 dietary weight (water and coffee come from the recall)
    "2013-2014+2015-2016-day1": {
        "cycles": ["2013-2014", "2015-2016"], "level": "day1",
        "model": {"exposure": "water_l_day",
                  "adjust": ["age_years", "sex", "bmi", "diabetes", "coffee_ml_day"],
                  "reference": {"sex": "female"}},
        "formula": "stone_ever ~ water_l_day + age_years + sex + bmi + diabetes + coffee_ml_day"},
    # a regular cycle with the pre-pandemic file, interview weight (interview items only)
    "2015-2016+2017-2020-interview": {
        "cycles": ["2015-2016", "2017-2020"], "level": "interview",
        "model": {"exposure": "diabetes", "adjust": ["age_years", "sex"],
                  "reference": {"sex": "female"}},
        "formula": "stone_ever ~ diabetes + age_years + sex"},
}


def map_csv(path: Path) -> Path:
    """The shipped food-code map as the flat CSV merge.R reads (the map is an input to both)."""
    food_map = load_map()
    rows = [{"kind": "row", "prefix": r.prefix, "group": r.group,
             "diet_group": r.diet_group or "", "value": ""} for r in food_map.rows]
    rows += [{"kind": "sum", "prefix": "", "group": name, "diet_group": "",
              "value": "+".join(parts)} for name, parts in food_map.sums]
    rows.append({"kind": "diet", "prefix": "", "group": "", "diet_group": "",
                 "value": repr(food_map.diet_kcal_per_100g)})
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


def merge_in_R(rscript: str, folder: Path, cycles: list[str], level: str, work: Path
               ) -> pd.DataFrame:
    out = work / "r_merged.csv"
    done = subprocess.run([rscript, "--vanilla", str(MERGE_R), str(folder), ",".join(cycles),
                           level, str(map_csv(work / "map.csv")), str(out)],
                          capture_output=True, text=True, timeout=300)
    if done.returncode != 0 or not out.is_file():
        pytest.fail(f"the R reference merge failed (exit {done.returncode}):\n{done.stderr}")
    print(f"R reference merge: {done.stdout.strip()}")
    return pd.read_csv(out, keep_default_na=False, na_values=[""])


@pytest.fixture(params=list(CASES), ids=list(CASES))
def case(request, tmp_path) -> dict:
    spec = CASES[request.param]
    components = None if spec["level"] == "day1" else ["demographics", "diabetes", "kidney"]
    write_survey(tmp_path / "files", spec["cycles"], seed=11, n=500, components=components)
    config = {"name": "against-r",
              "data": {"source": "nhanes", "dir": str(tmp_path / "files"),
                       "cycles": spec["cycles"], "cache": False},
              "population": ["age_years >= 20"],
              "models": [{"name": "m", "outcome": "stone_ever", **spec["model"]}]}
    return {**spec, "config": config, "folder": tmp_path / "files", "work": tmp_path}


@pytest.mark.r_reference
def test_merged_recoded_weighted_table_matches_the_merge_done_in_R(rscript, case):
    ours = cohortstone.run(case["config"], write=False)
    frame = cohortstone.pipeline.prepare(ours.study, cohortstone.pipeline._Clock()).frame
    # base R (foreign::read.xport + match()), tests/reference/nhanes/merge.R
    theirs = merge_in_R(rscript, case["folder"], case["cycles"], case["level"], case["work"])
    assert len(frame) == len(theirs)
    missing = sorted(set(theirs.columns) - set(frame.columns))
    assert not missing, f"columns R made that cohortstone did not: {missing}"
    for column in theirs.columns:
        a, b = frame[column], theirs[column]
        if pd.api.types.is_numeric_dtype(b) and b.notna().any():
            assert_allclose(a.to_numpy(dtype=float), b.to_numpy(dtype=float), rtol=1e-12,
                            atol=0, equal_nan=True, err_msg=f"column {column} differs from R")
        else:
            assert list(a.fillna("").astype(str)) == list(b.fillna("").astype(str)), column
    # the weights really are combined: the cycles' shares of the summed weight follow the years
    shares = theirs.groupby("cycle", sort=False)["weight"].sum()
    assert (shares > 0).all()


@pytest.mark.r_reference
def test_design_based_logistic_fit_matches_R_survey_on_the_R_merged_files(rscript, case):
    results = cohortstone.run(case["config"], write=False)
    assert results.study.design is not None, "the design comes from the files"
    table = results.odds_ratios
    assert (table["flag"] == "").all(), set(table["flag"])
    codings = {c.column: c for c in results.manifest["codings"]["m"]}
    ours = table[table["se"].notna()].copy()
    ours["r_name"] = [r_name(t, lv, codings) for t, lv in zip(ours["term"], ours["level"])]
    theirs = merge_in_R(rscript, case["folder"], case["cycles"], case["level"], case["work"])
    csv = case["work"] / "r_merged_for_fit.csv"
    theirs.to_csv(csv, index=False)
    # R survey package (Lumley), svyglm quasibinomial on R's merged table; strata
    # "<cycle>:<SDMVSTRA>" with nest = TRUE, clusters SDMVPSU, domain by subset()
    r = fit_in_R(rscript, csv, {"formula": case["formula"], "domain": "age_years >= 20",
                                "factors": {"sex": "female"}}, case["work"])
    assert_table_matches(ours, r, context=f"nhanes {'+'.join(case['cycles'])}")
    manifest_weights = results.manifest["source"]["weights"]
    expected = {"day1": "day-1 dietary", "interview": "interview"}[case["level"]]
    assert manifest_weights["level"] == expected
    assert np.isclose(sum(manifest_weights["factors"].values()), 1.0)
