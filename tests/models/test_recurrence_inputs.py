"""Bad recurrence configs and bad follow-up data are refused: exit code 2, one paragraph naming
the key (and YAML line) or the column and what was expected, no traceback, no output, inputs
untouched. Data are the INVENTED demo clinic cohort, with one fault put in each copy."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cohortstone.cli import main
from cohortstone.config.load import load_yaml
from cohortstone.config.spec import DataSpec, parse_study
from cohortstone.errors import ConfigError
from cohortstone.sources import clinic
from tests.helpers import folder_listing

HEADER = "name: bad\ndata: {source: demo, dataset: clinic}\nmodels:\n"
GOOD = "type: recurrence, exposure: fluid_l_day"


def problems(text: str, tmp_path: Path) -> list[str]:
    path = tmp_path / "study.yaml"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        parse_study(load_yaml(path))
    return info.value.problems


@pytest.mark.parametrize("model, message", [
    ("time: years_to_recurrence, event: recurred, index_date: index_date",
     "give follow-up either as durations (`time`, `event`) or as dates"),
    ("time: years_to_recurrence", "the required key `event` is missing"),
    ("index_date: index_date, end_date: end_date", "the required key `event_date` is missing"),
    ("start: a, time: b, event: recurred", "need both `start` (the interval's start) and `id`"),
    ("outcome: recurred, time: years_to_recurrence, event: recurred",
     "recurrence models take `event` (or `event_date`) for the recurrence, not `outcome`"),
    ("time: years_to_recurrence, event: recurred, proportional_hazards: maybe",
     "expected one of warn, fail"),
    ("time: fluid_l_day, event: recurred", "`fluid_l_day` is also the exposure or a covariate"),
    ("time: years_to_recurrence, event: years_to_recurrence",
     "`years_to_recurrence` is already named by `time`"),
    ("", "a recurrence model needs its follow-up"),
    ("time: years_to_recurence, event: recurred, clustr: clinic_id",
     "unknown key. Did you mean `cluster`?"),
])
def test_recurrence_model_mistakes_are_named_with_key_and_line(model, message, tmp_path):
    found = problems(HEADER + f"  - {{name: m, {GOOD}, {model}}}\n", tmp_path)
    assert any(message in p and "(line 4)" in p for p in found), found


def test_follow_up_keys_in_a_logistic_model_are_refused(tmp_path):
    found = problems("name: a\ndata: {source: demo}\nmodels:\n  - {name: m, outcome: stone_ever,"
                     " exposure: water_l_day, time: t}\n", tmp_path)
    assert any("key `models[0].time` (line 4): this key belongs to `type: recurrence`" in p
               for p in found), found


def test_a_survey_design_with_a_recurrence_model_is_refused_with_the_reason(tmp_path):
    found = problems(HEADER.replace("models:\n", "design: {weight: w}\nmodels:\n")
                     + f"  - {{name: m, {GOOD}, time: years_to_recurrence, event: recurred}}\n",
                     tmp_path)
    assert any("key `models[0].type` (line 5): recurrence models are fitted to a cohort "
               "without survey weights" in p for p in found), found


# ---- bad data through the command line ------------------------------------------------------


def _people() -> pd.DataFrame:
    return clinic.load().head(400).reset_index(drop=True)


def _intervals() -> pd.DataFrame:
    rows = clinic.load(DataSpec(source="demo", dataset="clinic_intervals"))
    return rows[rows["person_id"] <= 300].reset_index(drop=True)


def _edit(frame: pd.DataFrame, column: str, row: int, value) -> pd.DataFrame:
    out = frame.copy()
    out[column] = out[column].astype(object) if isinstance(value, str) else out[column]
    out.loc[row, column] = value
    return out


def _overlap() -> pd.DataFrame:
    rows = _intervals()
    second = rows.index[rows["episode"] == 2][0]
    rows.loc[second, "start_years"] = rows.loc[second - 1, "stop_years"] - 0.1
    return rows


def _both() -> pd.DataFrame:
    people = _people()
    people.loc[people.index[people["recurred"] == 1][0], "died"] = 1.0
    return people


DURATIONS = ("time: years_to_recurrence, event: recurred")
DATES = "index_date: index_date, event_date: first_recurrence_date, end_date: end_date"
COUNTING = "start: start_years, time: stop_years, event: recurred, id: person_id"

CASES = {
    "negative_time": (lambda: _edit(_people(), "years_to_recurrence", 3, -0.5), DURATIONS,
                      "models.m.time: column `years_to_recurrence` is negative (follow-up "
                      "cannot be) in 1 row(s) of the population (first at row 4 of the data)"),
    "missing_time": (lambda: _edit(_people(), "years_to_recurrence", 5, np.nan), DURATIONS,
                     "models.m.time: column `years_to_recurrence` is missing (or infinite) in "
                     "1 row(s)"),
    "event_codes": (lambda: _people().assign(recurred=lambda d: d["recurred"] + 1), DURATIONS,
                    "models.m.event: column `recurred` must be coded 0/1 (1 recurrence, 0 none)"
                    " but holds 2"),
    "text_time": (lambda: _edit(_people(), "years_to_recurrence", 0, "soon"), DURATIONS,
                  "models.m.time: column `years_to_recurrence` must hold follow-up times in "
                  "years"),
    "no_recurrence": (lambda: _people().assign(recurred=0.0), DURATIONS,
                      "hold no recurrence, so there is nothing to model"),
    "missing_cluster": (lambda: _edit(_people(), "clinic_id", 2, np.nan),
                        DURATIONS + ", cluster: clinic_id",
                        "models.m.cluster: column `clinic_id` is missing in 1 row(s)"),
    "death_and_recurrence": (_both, DURATIONS + ", competing: died",
                             "models.m.competing: column `died` is 1 on a row whose `recurred` "
                             "also records a recurrence"),
    "event_before_index": (lambda: _edit(_people(), "first_recurrence_date",
                                         int(np.flatnonzero(_people()["recurred"] == 1)[0]),
                                         "2001-01-01"), DATES,
                           "models.m.event_date: column `first_recurrence_date` is before the "
                           "index date `index_date`"),
    "no_end_date": (lambda: _edit(_people(), "end_date",
                                  int(np.flatnonzero(_people()["recurred"] == 0)[0]), np.nan),
                    DATES, "models.m.end_date: column `end_date` is missing where "
                           "`first_recurrence_date` is empty (no recurrence)"),
    "not_a_date": (lambda: _edit(_people(), "index_date", 7, "spring 2012"), DATES,
                   "models.m.index_date: column `index_date` holds text that is not a date "
                   "written YYYY-MM-DD ('spring 2012')"),
    "start_not_before_stop": (lambda: _edit(_intervals(), "start_years", 4, 50.0), COUNTING,
                              "models.m.start: column `start_years` is not before the "
                              "interval's end `stop_years` (start must be < time)"),
    "overlapping_intervals": (_overlap, COUNTING, "starts before the previous interval of the "
                              "same `person_id` has ended"),
    "missing_id": (lambda: _edit(_intervals(), "person_id", 6, np.nan), COUNTING,
                   "models.m.id: column `person_id` is missing in 1 row(s)"),
    "misspelt_column": (_people, "time: years_to_recurence, event: recurred",
                        "models.m.time: column `years_to_recurence` is not in the data. Did you "
                        "mean `years_to_recurrence`?"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_follow_up_data_is_refused_cleanly(case, tmp_path, capsys):
    make, keys, message = CASES[case]
    work = tmp_path / "work"
    work.mkdir()
    make().to_csv(work / "cohort.csv", index=False)
    config = work / "bad.yaml"
    config.write_text("name: bad\ndata: {source: table, path: cohort.csv}\nmodels:\n"
                      f"  - {{name: m, {GOOD}, {keys}}}\n")
    before = {p: p.read_bytes() for p in work.iterdir()}
    out = tmp_path / "reports"

    code = main(["run", str(config), "--out", str(out)])

    err = capsys.readouterr().err
    assert code == 2, err
    assert err.startswith("cohortstone: error: bad.yaml (data: cohort.csv): "), err
    assert message in err, err
    assert "Traceback" not in err and err.count("\n") == 1, "one paragraph"
    assert not out.exists(), "a refused run must leave no output folder"
    assert {p: p.read_bytes() for p in work.iterdir()} == before, "inputs must not change"


def test_a_failed_proportional_hazards_check_stops_the_run_when_asked(tmp_path, capsys):
    """INVENTED data whose hazard ratio flips sign at one year: the check finds it; with
    `proportional_hazards: fail` the run stops with exit 2 and writes nothing."""
    rng = np.random.default_rng(8)
    n = 1500
    treated = (rng.random(n) < 0.5).astype(float)
    early = rng.exponential(1 / np.where(treated == 1, 0.9, 0.3))
    late = 1 + rng.exponential(1 / np.where(treated == 1, 0.1, 0.5))
    time = np.where(early < 1, early, late)
    censor = rng.uniform(0.2, 6, n)
    frame = pd.DataFrame({"years": np.minimum(time, censor), "recurred": (time <= censor) * 1.0,
                          "treated": treated})
    frame.to_csv(tmp_path / "flip.csv", index=False)
    for rule, code_expected in (("warn", 0), ("fail", 2)):
        config = tmp_path / f"{rule}.yaml"
        config.write_text(
            f"name: flip-{rule}\ndata: {{source: table, path: flip.csv}}\nmodels:\n"
            "  - {name: m, type: recurrence, time: years, event: recurred, exposure: treated,"
            f" proportional_hazards: {rule}}}\n")
        code = main(["run", str(config), "--out", str(tmp_path / "reports")])
        err = capsys.readouterr().err
        assert code == code_expected, err
        assert "the proportional-hazards check found p < 0.05 for treated" in err
    assert "`proportional_hazards: fail`" in err and "Traceback" not in err
    assert [p.name for p in (tmp_path / "reports").iterdir()] == ["flip-warn"], \
        folder_listing(tmp_path / "reports")
    table = pd.read_csv(tmp_path / "reports" / "flip-warn" / "proportional_hazards.csv")
    assert table.loc[table["term"] == "treated", "verdict"].iloc[0].startswith(
        "hazards may not be proportional")
