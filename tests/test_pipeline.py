"""The whole pipeline on the demo: every output of the contract, atomically, reproducibly."""
from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

import cohortstone
from cohortstone.report import forest

DEMO = Path(__file__).parents[1] / "configs" / "demo.yaml"
OUTPUTS = ["forest.png", "forest.svg", "manifest.json", "odds_ratios.csv", "prevalence.csv",
           "prevalence.png", "prevalence.svg", "prevalence_full.csv", "report.html",
           "table1.csv", "tables.md"]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("reports")
    return cohortstone.run(DEMO, out=out), out


def test_the_demo_writes_every_output_of_the_contract(demo_run):
    results, out = demo_run
    assert results.output_dir == out / "demo"
    assert sorted(p.name for p in (out / "demo").iterdir()) == OUTPUTS
    assert [p.name for p in out.iterdir()] == ["demo"], "no staging folders left behind"


def test_odds_ratio_table_has_the_contract_columns_and_reference_rows(demo_run):
    results, out = demo_run
    table = pd.read_csv(out / "demo" / "odds_ratios.csv", keep_default_na=False,
                        na_values=[""])
    for column in ["model", "term", "level", "odds_ratio", "ci_lower", "ci_upper",
                   "p_value", "n"]:
        assert column in table.columns
    ref = table[(table["model"] == "water-groups") & (table["level"] == "<0.5")].iloc[0]
    assert ref["odds_ratio"] == 1 and pd.isna(ref["ci_lower"]) and pd.isna(ref["p_value"])
    cont = table[(table["model"] == "water-per-litre") & (table["term"] == "water_l_day")]
    assert cont["level"].isna().all() and cont["df"].iloc[0] == 20  # 35 clusters − 15 strata
    groups = table[(table["model"] == "water-groups") & (table["term"] == "water_l_day")]
    assert groups["n"].sum() == cont["n"].iloc[0]
    assert groups["p_trend"].notna().all() and groups["p_joint"].notna().all()


def test_intervals_are_t_based_wald_intervals_on_the_log_scale(demo_run):
    from scipy import stats
    results, _ = demo_run
    row = results.odds_ratios.query("model == 'soft-drinks-per-250ml' and term == "
                                    "'soft_drink_ml_day'").iloc[0]
    t = stats.t.ppf(0.975, row["df"])
    import math
    assert row["ci_lower"] == pytest.approx(math.exp(row["log_odds_ratio"] - t * row["se"]))
    assert row["per"] == 250


def test_the_manifest_records_config_inputs_versions_timings_and_domain(demo_run):
    results, out = demo_run
    m = json.loads((out / "demo" / "manifest.json").read_text())
    assert m["config"]["name"] == "demo"
    assert str(DEMO) in m["inputs_sha256"] and len(m["inputs_sha256"][str(DEMO)]) == 64
    assert m["versions"]["cohortstone"] == cohortstone.__version__
    assert set(m["seconds"]["model_fits"]) == {"water-groups", "water-per-litre",
                                               "soft-drinks-per-250ml", "total-fluid-quartiles"}
    assert m["rows"]["read"] == 8027
    assert m["rows"]["models"]["water-groups"]["left_domain"] == {"missing stone_ever": 29,
                                                                   "missing bmi": 203}
    assert "started" in m


def test_the_report_is_self_contained_and_says_what_it_is(demo_run):
    _, out = demo_run
    page = (out / "demo" / "report.html").read_text()
    assert "<svg" in page
    for external in ['src="http', 'href="http', "url(http", "@import", "<script", "<link"]:
        assert external not in page, f"the page must not load anything: {external}"
    assert "Invented data" in page and "Nothing here is medical advice" in page
    for heading in ["Data", "Who was analysed", "Table 1", "Prevalence", "Odds ratios",
                    "Forest plot", "Methods", "Limitations and cautions"]:
        assert f"<h2>{heading}</h2>" in page
    assert "Taylor-series linearisation" in page and "20 df" in page
    assert "Cycles in the analysis population: demo-1." in page


def test_a_rerun_gives_byte_identical_tables_and_figures(demo_run, tmp_path):
    _, out = demo_run
    cohortstone.run(DEMO, out=tmp_path)
    for name in ["odds_ratios.csv", "forest.svg", "forest.png", "report.html", "prevalence.csv",
                 "prevalence_full.csv", "prevalence.svg", "prevalence.png", "table1.csv",
                 "tables.md"]:
        assert (tmp_path / "demo" / name).read_bytes() == (out / "demo" / name).read_bytes(), name


def test_a_failure_while_writing_leaves_nothing_behind(tmp_path, monkeypatch):
    def broken(table):
        raise RuntimeError("disk full")
    monkeypatch.setattr(forest, "render", broken)
    with pytest.raises(RuntimeError):
        cohortstone.run(DEMO, out=tmp_path / "new" / "reports")
    assert not (tmp_path / "new").exists()


def test_a_rerun_replaces_the_previous_folder_whole(tmp_path):
    (tmp_path / "demo").mkdir()
    (tmp_path / "demo" / "stale.txt").write_text("old")
    cohortstone.run(DEMO, out=tmp_path)
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == OUTPUTS


def test_the_python_api_takes_a_dict_and_can_skip_writing(tmp_path):
    config = {"name": "nb", "data": {"source": "demo"}, "population": ["age_years >= 20"],
              "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day"}]}
    results = cohortstone.run(config, write=False)
    assert results.output_dir is None
    row = results.odds_ratios.query("term == 'water_l_day'").iloc[0]
    assert pd.isna(row["df"]), "without a design, intervals use the normal distribution"
    assert 0 < row["odds_ratio"] < 1


def test_the_forest_plot_has_one_row_per_exposure_level_and_a_line_at_one(demo_run):
    results, _ = demo_run
    fig = forest.figure(results.odds_ratios)
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert len(labels) == int((results.odds_ratios["role"] == "exposure").sum())
    assert labels[0] == "water-groups: water_l_day <0.5"
    assert ax.get_xscale() == "log"
    assert any(list(line.get_xdata()) == [1.0, 1.0] for line in ax.get_lines())
    texts = [t.get_text() for t in ax.texts]
    assert "1 (reference)" in texts and any("\u2013" in t for t in texts)
    import matplotlib.pyplot as plt
    plt.close(fig)
