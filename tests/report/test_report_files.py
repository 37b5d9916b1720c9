"""The published files: small counts withheld everywhere, Markdown tables, yearly comparison."""
from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

import cohortstone
from cohortstone.errors import DataError
from cohortstone.report.cells import protect
from cohortstone.sources import demo

PUBLISHED = ["odds_ratios.csv", "prevalence.csv", "table1.csv", "tables.md", "report.html"]


def small_config(path: Path, threshold: int = 11) -> dict:
    return {
        "name": "small", "data": {"source": "table", "path": str(path)},
        "population": ["age_years >= 20"],
        "design": {"weight": "weight", "strata": "strata", "cluster": "psu"},
        "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day",
                    "cuts": [0.5, 1.5], "adjust": ["sex", "region"]}],
        "prevalence": {"outcome": "stone_ever", "by": ["region"]},
        "describe": {"columns": ["region", "bmi"], "by": "sex"},
        "report": {"suppress_counts_below": threshold},
    }


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    # invented: a tiny region of 7 adults makes counts of 1-10 in every table
    folder = tmp_path_factory.mktemp("small")
    frame = demo.load()
    adults = frame.index[frame["age_years"] >= 20]
    frame["region"] = "lowland"
    frame.loc[adults[:7], "region"] = "island"
    frame.loc[adults[:7], "stone_ever"] = [1, 0, 0, 0, 0, 0, 0]
    frame.to_csv(folder / "survey.csv", index=False)
    cohortstone.run(small_config(folder / "survey.csv"), out=folder / "reports")
    return folder / "reports" / "small"


def test_protect_replaces_counts_of_one_to_ten_only():
    frame = pd.DataFrame({"n": [0, 1, 10, 11, 500], "estimate": [0.5, 1, 2, 3, 4]})
    out = protect(frame, ("n",), 11)
    assert out["n"].tolist() == [0, "<11", "<11", 11, 500]
    assert out["estimate"].tolist() == [0.5, 1, 2, 3, 4], "estimates are not counts"


def test_no_count_below_the_threshold_appears_in_any_published_file(small_run):
    for name in ["odds_ratios.csv", "prevalence.csv", "table1.csv"]:
        table = pd.read_csv(small_run / name, dtype=str, keep_default_na=False)
        for column in ["n", "cases", "missing"]:
            if column in table.columns:
                values = table[column][table[column] != ""]
                numbers = pd.to_numeric(values[values != "<11"])
                assert not numbers.between(1, 10).any(), f"{name}:{column}"
                assert (values == "<11").any() or column == "missing", f"{name}:{column}"
    markdown = (small_run / "tables.md").read_text()
    page = (small_run / "report.html").read_text()
    for text in (markdown, page):
        assert "&lt;11" in text or "<11" in text
        assert not re.search(r"\[n=([1-9]|10)\]", text), "Table 1 counts are protected"
    assert "Counts of 1 to 10 people are shown as" in page


def test_the_full_precision_file_keeps_the_counts_for_the_analyst(small_run):
    full = pd.read_csv(small_run / "prevalence_full.csv")
    assert full.loc[full["group"] == "island", "n"].iloc[0] == 7


def test_tables_md_holds_every_table_as_markdown(small_run):
    markdown = (small_run / "tables.md").read_text()
    for heading in ["## Who was analysed", "## Table 1", "## Prevalence", "## Odds ratios: m"]:
        assert heading in markdown
    assert "| Term | Level | n | Cases | Odds ratio (95% CI) | p |" in markdown
    assert "| --- | --- | ---: | ---: | --- | ---: |" in markdown


def test_a_threshold_of_one_turns_the_protection_off(tmp_path):
    frame = demo.load()
    frame["region"] = "lowland"
    frame.loc[frame.index[frame["age_years"] >= 20][:7], "region"] = "island"
    frame.to_csv(tmp_path / "survey.csv", index=False)
    results = cohortstone.run(small_config(tmp_path / "survey.csv", threshold=1),
                              out=tmp_path / "reports")
    table = pd.read_csv(results.output_dir / "prevalence.csv")
    assert table.loc[table["group"] == "island", "n"].iloc[0] == 7


def test_a_compare_run_lists_what_changed_after_one_input_value_is_altered(tmp_path):
    frame = demo.load()
    frame.to_csv(tmp_path / "survey.csv", index=False)
    config = {"name": "yearly", "data": {"source": "table", "path": str(tmp_path / "survey.csv")},
              "population": ["age_years >= 20"],
              "design": {"weight": "weight", "strata": "strata", "cluster": "psu"},
              "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day",
                          "adjust": ["sex", "race_ethnicity"]}],
              "prevalence": {"outcome": "stone_ever", "by": ["sex", "race_ethnicity"]}}
    first = cohortstone.run(config, out=tmp_path / "last-year")
    # one altered value: an adult case now counts a million times over, and is recorded
    # under a new race/ethnicity label
    case = frame.index[(frame["age_years"] >= 20) & (frame["stone_ever"] == 1)][0]
    frame.loc[case, "weight"] *= 1e6
    frame.loc[case, "race_ethnicity"] = "newly-recorded"
    frame.to_csv(tmp_path / "survey.csv", index=False)

    second = cohortstone.run(config, out=tmp_path / "this-year", compare=first.output_dir)

    changes = pd.read_csv(second.output_dir / "changes.csv", keep_default_na=False)
    new = changes[changes["status"] == "new"]
    assert set(new["key"]) == {"race_ethnicity | newly-recorded",
                               "m | race_ethnicity | newly-recorded"}
    everyone = changes[(changes["table"] == "prevalence") & (changes["key"] == "all | all")]
    assert bool(everyone["beyond_intervals"].iloc[0]) is True
    assert float(everyone["new"].iloc[0]) > 0.5 > float(everyone["old"].iloc[0])
    assert "<h2>Changes since the previous report</h2>" in (
        second.output_dir / "report.html").read_text()


def test_comparing_with_a_folder_that_is_not_a_report_is_refused(tmp_path):
    config = {"name": "c", "data": {"source": "demo"},
              "prevalence": {"outcome": "stone_ever"}, "population": ["age_years >= 20"]}
    with pytest.raises(DataError, match="is not a cohortstone report folder"):
        cohortstone.run(config, out=tmp_path / "out", compare=tmp_path)
    assert not (tmp_path / "out").exists()
