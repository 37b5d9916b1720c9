"""The recurrence demo end to end: every file, the report's sections, reruns byte-identical,
small counts withheld, dates equal to durations, the figure on a given Axes, year-on-year
comparison. All data are the INVENTED demo clinic cohort."""
from __future__ import annotations

import json
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import pytest

import cohortstone
from cohortstone.cli import main
from cohortstone.config.load import load_yaml
from cohortstone.config.spec import parse_study
from cohortstone.models import recurrence
from cohortstone.models.cohort import prepare
from cohortstone.report import curves_plot
from cohortstone.sources import clinic

CONFIGS = Path(__file__).parents[2] / "configs"
DEMO = CONFIGS / "demo-clinic.yaml"
REPEAT = CONFIGS / "demo-clinic-repeat.yaml"
OUTPUTS = ["forest.png", "forest.svg", "hazard_ratios.csv", "manifest.json",
           "proportional_hazards.csv", "recurrence.png", "recurrence.svg",
           "recurrence_curve.csv", "report.html", "table1.csv", "tables.md"]
REPRODUCIBLE = [n for n in OUTPUTS if n != "manifest.json"]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("reports")
    return cohortstone.run(DEMO, out=out), out / "demo-clinic"


def test_the_clinic_demo_writes_hazard_ratios_curves_checks_and_the_report(demo_run):
    results, folder = demo_run
    assert sorted(p.name for p in folder.iterdir()) == OUTPUTS
    table = pd.read_csv(folder / "hazard_ratios.csv", keep_default_na=False, na_values=[""])
    for column in ["model", "term", "level", "hazard_ratio", "ci_lower", "ci_upper", "p_value",
                   "n", "events", "ties", "variance", "outcome"]:
        assert column in table.columns
    assert set(table["ties"]) == {"Efron"}
    ref = table[(table["model"] == "fluid-groups") & (table["level"] == "<1.5")].iloc[0]
    assert ref["hazard_ratio"] == 1 and pd.isna(ref["ci_lower"]) and pd.isna(ref["p_value"])
    death = table[table["outcome"] == "death"]
    assert set(death["model"]) == {"citrate-death-competing"}
    assert death["analysis"].str.contains("cause-specific").all()
    assert table.loc[table["model"] == "fluid-groups", "variance"].iloc[0] == \
        "robust, clustered on clinic_id (12 clusters)"
    curve = pd.read_csv(folder / "recurrence_curve.csv")
    assert list(curve.columns[:7]) == ["model", "group", "years", "cumulative_recurrence",
                                       "ci_lower", "ci_upper", "at_risk"]
    assert sorted(set(curve["years"])) == [1, 2, 5, 10]
    assert set(curve.loc[curve["model"] == "citrate-death-competing", "measure"]) == {
        "Aalen-Johansen cumulative incidence (death competing)"}
    assert set(curve["group"]) >= {"all", "fluid_l_day: <1.5", "citrate: 1"}
    ph = pd.read_csv(folder / "proportional_hazards.csv")
    assert set(ph["term"]) >= {"fluid_l_day", "GLOBAL"} and ph["verdict"].str.len().gt(0).all()
    manifest = json.loads((folder / "manifest.json").read_text())
    assert set(manifest["seconds"]["model_fits"]) == {m["name"] for m in
                                                      manifest["config"]["models"]}


def test_the_demo_recovers_the_invented_truth_roughly(demo_run):
    """The simulation's fluid effect is −0.30 per litre given a person's tendency; the marginal
    hazard ratio of a first recurrence is attenuated by that tendency, so it lies between."""
    results, _ = demo_run
    hr = results.hazard_ratios
    per_litre = hr[(hr["model"] == "fluid-per-litre-from-dates") & (hr["term"] == "fluid_l_day")]
    b = float(per_litre["log_hazard_ratio"].iloc[0])
    assert clinic.TRUE_LOG_HAZARD_RATIOS["fluid_per_litre"] - 0.1 < b < -0.1


def test_the_report_says_what_each_competing_risk_answer_means_and_cautions(demo_run):
    _, folder = demo_run
    page = (folder / "report.html").read_text()
    for heading in ["Data", "Who was analysed", "Table 1", "Hazard ratios",
                    "Cumulative recurrence", "Proportional-hazards check", "Forest plot",
                    "Methods", "Limitations and cautions"]:
        assert f"<h2>{heading}</h2>" in page
    assert "Odds ratios" not in page
    assert "The cause-specific hazard ratio answers" in page
    assert "The cumulative incidence answers" in page
    assert "Efron&#x27;s method for tied times" in page and "days / 365.25" in page
    assert "Invented data" in page and "Fernhollow Stone Clinics" in page
    assert "observational associations" in page and "Nothing here is medical advice" in page
    assert "reverse causation" not in page, "the survey's caution does not fit a cohort"
    assert "This cohort analysis" in page
    markdown = (folder / "tables.md").read_text()
    assert "## Hazard ratios: fluid-groups" in markdown
    assert "| Term | Level | n | Events | Hazard ratio (95% CI) | p |" in markdown
    assert "## Proportional-hazards check: fluid-groups" in markdown


def test_a_rerun_gives_byte_identical_files(demo_run, tmp_path):
    _, folder = demo_run
    cohortstone.run(DEMO, out=tmp_path)
    for name in REPRODUCIBLE:
        assert (tmp_path / "demo-clinic" / name).read_bytes() == (folder / name).read_bytes(), \
            name


def test_follow_up_from_dates_equals_the_same_follow_up_in_years():
    """The demo's dates are whole days; its years are those days / 365.25, so both shapes of
    the same follow-up must give the same fit."""
    common = {"type": "recurrence", "exposure": "fluid_l_day", "cuts": [1.5, 2.5],
              "adjust": ["age_years", "sex"], "cluster": "clinic_id"}
    config = {"name": "same", "data": {"source": "demo", "dataset": "clinic"}, "models": [
        {"name": "years", "time": "years_to_recurrence", "event": "recurred", **common},
        {"name": "dates", "index_date": "index_date", "event_date": "first_recurrence_date",
         "end_date": "end_date", **common}]}
    results = cohortstone.run(config, write=False)
    hr = results.hazard_ratios.set_index(["model", "term", "level"])
    numbers = ["hazard_ratio", "ci_lower", "ci_upper", "se", "n", "events"]
    pd.testing.assert_frame_equal(hr.loc["years", numbers], hr.loc["dates", numbers],
                                  rtol=1e-12)
    curve = results.recurrence_curve.set_index(["model", "group", "years"])
    pd.testing.assert_frame_equal(curve.loc["years"], curve.loc["dates"], rtol=1e-12)


def test_repeated_recurrences_write_the_mean_number_per_person(tmp_path):
    results = cohortstone.run(REPEAT, out=tmp_path)
    folder = results.output_dir
    assert (folder / "recurrences_per_person.csv").is_file()
    assert not (folder / "recurrence_curve.csv").exists()
    table = pd.read_csv(folder / "recurrences_per_person.csv")
    overall = table[table["group"] == "all"].set_index("years")["mean_recurrences"]
    assert overall.is_monotonic_increasing and overall.loc[1] > 0
    hr = results.hazard_ratios
    assert hr["variance"].str.startswith("robust, clustered on the person (person_id").all()
    assert "Andersen\u2013Gill" in (folder / "report.html").read_text()


def test_small_counts_are_withheld_in_every_published_recurrence_table(tmp_path):
    """INVENTED: seven people get a stone type of their own, so n, events and numbers at risk
    of 1-10 appear; they must print as <11."""
    people = clinic.load()
    people.loc[people.index[:7], "stone_type"] = "rare"
    people = people.drop(columns=["index_date", "first_recurrence_date", "end_date"])
    people.to_csv(tmp_path / "cohort.csv", index=False)
    config = {"name": "small", "data": {"source": "table", "path": str(tmp_path / "cohort.csv")},
              "models": [{"name": "m", "type": "recurrence", "time": "years_to_recurrence",
                          "event": "recurred", "exposure": "stone_type",
                          "reference": {"stone_type": "calcium oxalate"}}]}
    results = cohortstone.run(config, out=tmp_path / "reports")
    folder = results.output_dir
    full = results.hazard_ratios.set_index("level")
    assert full.loc["rare", "n"] == 7, "the tidy frame keeps the count for the analyst"
    table = pd.read_csv(folder / "hazard_ratios.csv", dtype=str, keep_default_na=False)
    assert table.loc[table["level"] == "rare", "n"].iloc[0] == "<11"
    curve = pd.read_csv(folder / "recurrence_curve.csv", dtype=str, keep_default_na=False)
    rare = curve[curve["group"] == "stone_type: rare"]
    assert (rare["at_risk"].isin(["<11", "0"])).all() and (rare["at_risk"] == "<11").any()
    for column in ("n", "events", "at_risk"):
        for frame in (table, curve):
            if column in frame.columns:
                numbers = pd.to_numeric(frame[column], errors="coerce")
                assert not numbers.between(1, 10).any(), column
    assert "&lt;11" in (folder / "report.html").read_text()
    assert "<11" in (folder / "tables.md").read_text()


def test_the_curves_figure_draws_on_the_axes_it_is_given():
    study = parse_study(load_yaml(DEMO))
    spec = study.models[0]
    people = clinic.load()
    cohort = prepare(people, spec, np.ones(len(people), bool))
    one = recurrence.estimate(spec, cohort).curve_steps
    fig, (ax, risk) = plt.subplots(2, 1)
    assert curves_plot.draw(one, ax) is ax
    assert [t.get_text() for t in ax.get_legend().get_texts()] == [
        "all", "fluid_l_day: <1.5", "fluid_l_day: 1.5-<2.5", "fluid_l_day: >=2.5"]
    assert ax.get_ylabel() == "Cumulative recurrence, %"
    line = ax.get_lines()[0].get_ydata()
    assert np.nanmax(line) < 100 and np.all(np.diff(line[~np.isnan(line)]) >= 0)
    assert curves_plot.draw_at_risk(one, risk, 11) is risk
    counts = [t.get_text() for t in risk.texts]
    assert "2495" in counts and all(not c.isdigit() or int(c) >= 11 or int(c) == 0
                                    for c in counts)
    plt.close(fig)


def test_a_compare_run_lists_changed_hazard_ratios(tmp_path):
    people = clinic.load().drop(columns=["index_date", "first_recurrence_date", "end_date"])
    people.to_csv(tmp_path / "cohort.csv", index=False)
    config = {"name": "yearly", "data": {"source": "table", "path": str(tmp_path / "cohort.csv")},
              "models": [{"name": "m", "type": "recurrence", "time": "years_to_recurrence",
                          "event": "recurred", "exposure": "citrate", "adjust": ["age_years"]}]}
    first = cohortstone.run(config, out=tmp_path / "last-year")
    people["recurred"] = np.where(people["citrate"] == 1, 1.0, people["recurred"])  # altered
    people.to_csv(tmp_path / "cohort.csv", index=False)
    second = cohortstone.run(config, out=tmp_path / "this-year", compare=first.output_dir)
    changes = pd.read_csv(second.output_dir / "changes.csv", keep_default_na=False)
    row = changes[(changes["table"] == "hazard_ratios")
                  & (changes["key"] == "m | recurrence | citrate | ")].iloc[0]
    assert row["quantity"] == "hazard_ratio" and row["beyond_intervals"] in (True, "True")
    assert float(row["new"]) > float(row["old"])


def test_check_counts_events_for_recurrence_models(capsys):
    assert main(["check", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "model `fluid-groups`: 2495 rows analysed, 1034 events" in out
