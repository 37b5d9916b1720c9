"""Weight choice and the combination of cycles, against the survey's analytic guidelines.

Sources (keys of domain.md §2):
- [TUT-W1] NHANES weighting tutorial: "You must use the weight of the smallest subpopulation
  that includes all the variables you want to include in your analysis."
- [TUT-D] dietary tutorial: interview (WTINT2YR) > MEC (WTMEC2YR) > day-1 diet (WTDRD1).
- [AG-11-16] NHANES Analytic Guidelines 2011–2016 (and [TUT-W]): multi-year weights are "the
  2-year sample weights divided by the number of 2-year cycles in the analysis".
- [AKIN] Akinbami et al., NCHS Vital Health Stat Series 2 No. 190 (2022), and [PP-BRIEF]:
  "If SDDSRVYR = 9 then MEC52Y = (2/5.2)•WTMEC2YR; If SDDSRVYR = 66 then
  MEC52Y = (3.2/5.2)•WTMECPRP".
- [CB-P] P_KIQ_U codebook: the pre-pandemic file holds the 2017–2018 participants, and its
  weights are valid only for the combined file, so it is never stacked with 2017–2018.
- [CODE-PP][DR-CB-P] the pre-pandemic weight names WTINTPRP, WTMECPRP, WTDRD1PP.
"""
from __future__ import annotations

import pytest

import cohortstone
from cohortstone.errors import ConfigError
from cohortstone.sources.nhanes import weights
from cohortstone.sources.nhanes.cycles import DAY1, EXAM, INTERVIEW
from test_nhanes_layout import write_survey

NO_DRINKS: set[str] = set()


# ---- combining cycles: hand cases -----------------------------------------------------------


def test_two_regular_cycles_divide_each_2_year_weight_by_two():
    # [AG-11-16][TUT-W]: divide the 2-year weights by the number of 2-year cycles
    assert weights.factors(("2013-2014", "2015-2016")) == {"2013-2014": 0.5, "2015-2016": 0.5}
    four = weights.factors(("2007-2008", "2009-2010", "2011-2012", "2013-2014"))
    assert four == pytest.approx({c: 0.25 for c in four})
    assert weights.factors(("2015-2016",)) == {"2015-2016": 1.0}


def test_a_regular_cycle_with_the_prepandemic_file_weights_by_years_covered():
    # [AKIN][PP-BRIEF]: 2015-2016 weights x 2/5.2, pre-pandemic weights x 3.2/5.2
    f = weights.factors(("2015-2016", "2017-2020"))
    assert f["2015-2016"] == pytest.approx(2 / 5.2, rel=1e-15)
    assert f["2017-2020"] == pytest.approx(3.2 / 5.2, rel=1e-15)
    # a person weighted 1000 in each file (hand arithmetic): 384.615... and 615.384...
    assert 1000 * f["2015-2016"] == pytest.approx(384.6153846153846)
    assert 1000 * f["2017-2020"] == pytest.approx(615.3846153846154)


def test_every_stone_cycle_before_2017_with_the_prepandemic_file_spans_13_2_years():
    # domain.md §2: 2007-16 (10 years) + P (3.2 years) = 13.2 years; L_i / sum(L)
    cycles = ("2007-2008", "2009-2010", "2011-2012", "2013-2014", "2015-2016", "2017-2020")
    f = weights.factors(cycles)
    assert f["2007-2008"] == pytest.approx(2 / 13.2) and f["2017-2020"] == pytest.approx(3.2 / 13.2)
    assert sum(f.values()) == pytest.approx(1.0)


def test_2017_2018_stacked_with_the_prepandemic_file_is_refused():
    # [CB-P][PP-BRIEF]: the same people are in both files
    with pytest.raises(ConfigError, match="2017-2018 and 2017-2020 cannot be combined"):
        weights.factors(("2017-2018", "2017-2020"))


def test_the_refused_stack_is_a_config_error_naming_the_key_before_any_file_is_read(tmp_path):
    config = tmp_path / "study.yaml"
    config.write_text("name: stack\ndata:\n  source: nhanes\n  dir: nowhere\n  cycles: "
                      "[2015-2016, 2017-2018, 2017-2020]\nprevalence: {outcome: stone_ever}\n")
    with pytest.raises(ConfigError) as caught:
        cohortstone.check(config)
    assert "key `data.cycles` (line 5): the cycles 2017-2018 and 2017-2020 cannot be " \
           "combined" in str(caught.value)


# ---- which weight ---------------------------------------------------------------------------


@pytest.mark.parametrize("components, level, regular, prepandemic", [
    (["demographics", "kidney", "diabetes"], INTERVIEW, "WTINT2YR", "WTINTPRP"),
    (["demographics", "kidney", "body_measures"], EXAM, "WTMEC2YR", "WTMECPRP"),
    (["demographics", "kidney", "body_measures", "day1_totals"], DAY1, "WTDRD1", "WTDRD1PP"),
], ids=["interview-items-only", "with-exam-bmi", "with-day-1-recall"])
def test_the_weight_of_the_smallest_subsample_used_is_chosen(components, level, regular,
                                                             prepandemic):
    # [TUT-W1][TUT-D]; names [TUT-W][DR-CB][CODE-PP][DR-CB-P]
    plan = weights.plan(("2015-2016", "2017-2020"), components,
                        ["stone_ever", "bmi", "water_l_day"], NO_DRINKS)
    assert plan.level == level
    assert plan.variables == {"2015-2016": regular, "2017-2020": prepandemic}


def test_the_reason_names_the_columns_that_forced_the_smaller_subsample():
    plan = weights.plan(("2013-2014",), ["demographics", "kidney", "day1_totals", "day1_foods"],
                        ["stone_ever", "age_years", "coffee_ml_day"], {"coffee_ml_day"})
    assert "day-1 dietary recall weight" in plan.reason and "`coffee_ml_day`" in plan.reason
    assert "`stone_ever`" not in plan.reason
    text = weights.text(plan)
    assert "`WTDRD1`" in text and "one cycle" in text and "SDMVSTRA" in text


# ---- the loader applies them ----------------------------------------------------------------


def load(folder, cycles, columns):
    from cohortstone.config.spec import DataSpec
    from cohortstone.sources import nhanes
    spec = DataSpec(source="nhanes", dir=folder, cycles=tuple(cycles), cache=None)
    return nhanes.load(spec, columns)


def test_the_loaded_weight_is_the_files_weight_times_the_cycle_factor(tmp_path):
    written = write_survey(tmp_path, ["2015-2016", "2017-2020"], n=200)
    frame, record = load(tmp_path, ["2015-2016", "2017-2020"], ["stone_ever", "bmi"])
    for cycle, factor, variable in [("2015-2016", 2 / 5.2, "WTMEC2YR"),
                                    ("2017-2020", 3.2 / 5.2, "WTMECPRP")]:
        raw = written[cycle]["demographics"][variable].to_numpy()
        ours = frame.loc[frame["cycle"] == cycle, "weight"].to_numpy()
        assert ours == pytest.approx(raw * factor, rel=1e-14)
    assert record["weights"]["variables"] == {"2015-2016": "WTMEC2YR", "2017-2020": "WTMECPRP"}
    assert "3.2/5.2 for 2017-2020" in record["weights"]["combination"]


def test_people_outside_the_dietary_subsample_keep_their_rows_with_weight_zero(tmp_path):
    written = write_survey(tmp_path, ["2013-2014"], n=200)
    frame, _ = load(tmp_path, ["2013-2014"], ["water_l_day"])
    assert len(frame) == 200, "every person in the demographics file stays"
    totals = written["2013-2014"]["day1_totals"].set_index("SEQN")
    outside = ~frame["person_id"].isin(totals.index[totals["DR1DRSTZ"] == 1])
    assert (frame.loc[outside, "weight"] == 0).all()
    assert frame.loc[outside, "water_l_day"].isna().all()
    assert (frame.loc[~outside, "weight"] > 0).all()


def test_the_2021_2023_cycle_is_read_with_its_caution(tmp_path):
    # [L-URL] file suffix L; [L-BRIEF][L-REL]: new design, low response, read the brief first
    write_survey(tmp_path, ["2015-2016", "2021-2023"], n=150)
    frame, record = load(tmp_path, ["2015-2016", "2021-2023"], ["stone_ever", "water_l_day"])
    assert record["weights"]["variables"] == {"2015-2016": "WTDRD1", "2021-2023": "WTDRD1"}
    assert record["weights"]["factors"] == {"2015-2016": 0.5, "2021-2023": 0.5}
    assert any(n.startswith("2021-2023: August 2021–August 2023 used a new sample design")
               for n in record["notes"])
    assert {"DEMO_L", "KIQ_U_L", "DR1TOT_L"} <= {p.stem.upper() for p in tmp_path.iterdir()}
