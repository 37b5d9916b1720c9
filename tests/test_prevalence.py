"""Prevalence: domains by weight (never by dropping rows), publication blanks, standardization
coverage, the trend test, and the block's bad inputs."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import cohortstone
from cohortstone.config.spec import DesignSpec, PrevalenceSpec
from cohortstone.design import make_design
from cohortstone.errors import DataError
from cohortstone.prevalence import estimate, published
from cohortstone.sources import demo

DESIGN = {"weight": "weight", "strata": "strata", "cluster": "psu"}


def demo_config(**prevalence) -> dict:
    return {"name": "p", "data": {"source": "demo"}, "population": ["age_years >= 20"],
            "design": DESIGN, "derive": {"age_group": {"from": "age_years", "cuts": [20, 40, 60]}},
            "prevalence": {"outcome": "stone_ever", **prevalence}}


def test_domain_estimates_keep_every_row_and_dropping_rows_would_differ():
    # NHANES tutorials (variance estimation): subsetting before variance estimation treats
    # the subpopulation size as fixed and misstates the variance; domains use zero weights.
    frame = demo.load()
    # an invented district missing from some clusters: the third cluster of the five
    # three-cluster strata lies in the south
    frame["district"] = np.where(frame["psu"] == 3, "south", "north")
    spec = PrevalenceSpec(outcome="stone_ever", by=("district",))
    design = make_design(frame, DesignSpec("weight", "strata", "psu"))
    population = (frame["age_years"] >= 20).to_numpy()
    full, _ = estimate(frame, spec, population, design)
    right = full[(full["by"] == "district") & (full["group"] == "north")].iloc[0]

    kept = frame[population & frame["stone_ever"].notna().to_numpy()]
    north = kept[kept["district"] == "north"].reset_index(drop=True)
    dropped = make_design(north, DesignSpec("weight", "strata", "psu"))
    wrong, _ = estimate(north, PrevalenceSpec(outcome="stone_ever"), np.ones(len(north), bool),
                        dropped)
    assert wrong["prevalence"].iloc[0] == pytest.approx(right["prevalence"], rel=1e-12)
    assert abs(wrong["se"].iloc[0] / right["se"] - 1) > 0.01, "dropping rows changes the SE"
    assert right["df"] == 30 - 15  # 30 of 35 clusters hold northerners, in 15 strata


def test_the_overall_row_comes_first_then_each_by_column():
    results = cohortstone.run(demo_config(by=["sex", "age_group"]), write=False)
    table = results.prevalence
    assert list(zip(table["by"], table["group"])) == [
        ("all", "all"), ("sex", "female"), ("sex", "male"), ("age_group", "20-39"),
        ("age_group", "40-59"), ("age_group", "60+")]
    everyone = table.iloc[0]
    assert everyone["n"] == table.loc[table["by"] == "sex", "n"].sum()
    assert everyone["ci_lower"] < everyone["prevalence"] < everyone["ci_upper"]
    assert everyone["df"] == 20 and everyone["reliability"] == "ok"


def test_suppressed_estimates_are_blank_in_the_published_table_only():
    full = pd.DataFrame({"by": ["all", "g"], "group": ["all", "x"], "prevalence": [0.1, 0.2],
                         "se": [0.01, 0.2], "ci_lower": [0.08, 0.0], "ci_upper": [0.12, 0.9],
                         "reliability": ["ok", "suppress"],
                         "reliability_reason": ["", "effective sample size 3.0 is below 30"]})
    shown = published(full)
    assert shown.loc[1, ["prevalence", "se", "ci_lower", "ci_upper"]].isna().all()
    assert shown.loc[1, "reliability_reason"].startswith("effective sample size")
    assert shown.loc[0, "prevalence"] == 0.1 and full.loc[1, "prevalence"] == 0.2


def test_standardized_rows_need_every_standard_age_group():
    table = cohortstone.run(demo_config(by=["sex", "age_group"], standardize="adult3"),
                            write=False).prevalence
    assert table.loc[table["by"] == "sex", "adjusted_prevalence"].notna().all()
    age_rows = table[table["by"] == "age_group"]
    assert age_rows["adjusted_prevalence"].isna().all()
    assert age_rows["adjusted_reliability_reason"].str.startswith("not standardized").all()


def test_custom_standard_weights_are_normalised():
    a = cohortstone.run(demo_config(standardize={"cuts": [20, 40, 60],
                                                 "weights": [77670, 72816, 45364]}),
                        write=False).prevalence
    b = cohortstone.run(demo_config(standardize="adult3"), write=False).prevalence
    assert a["adjusted_prevalence"].iloc[0] == pytest.approx(b["adjusted_prevalence"].iloc[0],
                                                              rel=1e-12)


def cycles_csv(tmp_path, seed=7) -> str:
    # simulation with known truth: three invented cycles, prevalence rising by design
    rng = np.random.default_rng(seed)
    rows = []
    for c, share in enumerate([0.06, 0.08, 0.11]):
        for h in range(12):
            for psu in (1, 2):
                n = 150
                rows.append(pd.DataFrame({
                    "cycle": f"C{c + 1}", "strata": 100 * c + h, "psu": psu,
                    "weight": rng.uniform(500, 1500, n), "age_years": rng.integers(20, 80, n),
                    "stone_ever": (rng.random(n) < share).astype(float)}))
    path = tmp_path / "cycles.csv"
    pd.concat(rows, ignore_index=True).to_csv(path, index=False)
    return str(path)


def test_the_trend_across_cycles_matches_R_survey_svyglm(rscript, tmp_path):
    from tests.models.test_logistic_against_R import fit_in_R
    path = cycles_csv(tmp_path)
    config = {"name": "t", "data": {"source": "table", "path": path}, "design": DESIGN,
              "prevalence": {"outcome": "stone_ever", "trend": "cycle"}}
    results = cohortstone.run(config, write=False)
    trend = results.prevalence_trend.iloc[0]
    # 36 strata (12 per cycle) of 2 clusters each
    assert trend["levels"] == "C1 < C2 < C3" and trend["df"] == 72 - 36
    frame = pd.read_csv(path)
    frame["step"] = frame["cycle"].map({"C1": 0, "C2": 1, "C3": 2})
    frame.to_csv(tmp_path / "steps.csv", index=False)
    # R survey package (Lumley): svyglm(quasibinomial) on the cycle order
    r = fit_in_R(rscript, tmp_path / "steps.csv",
                 {"formula": "stone_ever ~ step", "domain": "!is.na(stone_ever)"}, tmp_path)
    assert np.log(trend["odds_ratio_per_step"]) == pytest.approx(r.coef["step"], rel=1e-6)
    assert trend["p_value"] < 0.05
    assert set(results.prevalence["by"]) == {"all", "cycle"}


@pytest.mark.parametrize("block, message", [
    ({"outcome": "stone_evr"}, "prevalence.outcome: column `stone_evr` is not in the data. "
                               "Did you mean `stone_ever`?"),
    ({"outcome": "stone_ever", "by": ["sexx"]}, "prevalence.by: column `sexx`"),
    ({"outcome": "stone_ever", "trend": "cycle"}, "needs at least three cycles"),
    ({"outcome": "sex"}, "must be coded 0/1"),
])
def test_bad_prevalence_blocks_are_data_errors(block, message):
    config = demo_config()
    config["prevalence"] = block
    with pytest.raises(DataError, match=None) as info:
        cohortstone.run(config, write=False)
    assert message in str(info.value)


def test_a_population_in_one_cluster_per_stratum_has_no_df_and_is_flagged(tmp_path):
    # invented: everyone in the population lives in the first cluster of their stratum
    frame = demo.load()
    frame["district"] = np.where(frame["psu"] == 1, "north", "south")
    frame.to_csv(tmp_path / "s.csv", index=False)
    config = {"name": "x", "data": {"source": "table", "path": str(tmp_path / "s.csv")},
              "population": ["age_years >= 20", "district == 'north'"], "design": DESIGN,
              "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day"}],
              "prevalence": {"outcome": "stone_ever"}}
    results = cohortstone.run(config, write=False)
    assert results.odds_ratios["flag"].str.startswith("no design degrees of freedom").all()
    assert results.odds_ratios["odds_ratio"].isna().all()
    row = results.prevalence.iloc[0]
    assert row["df"] == 0 and row["reliability"] == "suppress"
    assert any("one cluster only" in note for note in results.manifest["notes"])
