"""A config with `source: nhanes` end to end, and the ways bad input is refused.

The files are INVENTED (test_nhanes_layout.py). Bad input must give exit code 2, one
paragraph naming the file, key or column, no traceback, no output folder, and unchanged
inputs.
"""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest

import cohortstone
from cohortstone.cli import main
from cohortstone.errors import ConfigError
from test_nhanes_layout import write_survey

CONFIG = """\
name: stones
title: Water and stone history (invented files)
data:
  source: nhanes
  dir: files
  cycles: [2013-2014, 2015-2016]
derive:
  age_group: {from: age_years, cuts: [20, 40, 60]}
population:
  - age_years >= 20
models:
  - name: water
    outcome: stone_ever
    exposure: water_l_day
    adjust: [age_years, sex, bmi, diabetes]
    reference: {sex: female}
  - name: coffee
    outcome: stone_ever
    exposure: coffee_ml_day
    per: 250
    adjust: [age_years, sex]
prevalence:
  outcome: stone_ever
  by: [sex]
describe:
  columns: [age_years, water_l_day, citrus_juice_ml_day]
"""


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("nhanes") / "files"
    write_survey(folder, ["2013-2014", "2015-2016"], n=450)
    return folder


def study(tmp_path: Path, files: Path, text: str = CONFIG, cache: bool = False) -> Path:
    shutil.copytree(files, tmp_path / "files")
    if not cache:
        text = text.replace("  dir: files\n", "  dir: files\n  cache: false\n")
    (tmp_path / "study.yaml").write_text(text)
    return tmp_path / "study.yaml"


def snapshot(folder: Path) -> dict:
    return {p.relative_to(folder): p.read_bytes() for p in folder.rglob("*") if p.is_file()}


def test_a_config_runs_end_to_end_without_a_design_block(tmp_path, files, capsys):
    config = study(tmp_path, files, cache=True)
    before = snapshot(tmp_path / "files")
    assert main(["run", str(config), "--out", str(tmp_path / "out")]) == 0
    out = tmp_path / "out" / "stones"
    assert {"odds_ratios.csv", "prevalence.csv", "table1.csv", "report.html",
            "manifest.json"} <= {p.name for p in out.iterdir()}
    after = snapshot(tmp_path / "files")
    assert {k: v for k, v in after.items() if k.parts[0] != ".cohortstone-cache"} == before, \
        "input files are never modified; only the cache folder is added"
    assert len([k for k in after if k.parts[0] == ".cohortstone-cache"]) == 1
    table = pd.read_csv(out / "odds_ratios.csv", keep_default_na=False, na_values=[""])
    water = table[(table["model"] == "water") & (table["term"] == "water_l_day")].iloc[0]
    # 2 cycles x 6 strata x 2 PSUs, strata nested within cycle: 24 - 12 = 12 df
    assert water["df"] == 12
    manifest = json.loads((out / "manifest.json").read_text())
    source = manifest["source"]
    assert source["weights"]["variables"] == {"2013-2014": "WTDRD1", "2015-2016": "WTDRD1"}
    assert source["weights"]["factors"] == {"2013-2014": 0.5, "2015-2016": 0.5}
    assert "`water_l_day`" in source["weights"]["reason"]
    # refused / don't-know counts per code and cycle
    kiq026 = [c for c in source["missing_codes"] if c["variable"] == "KIQ026"]
    assert {(c["cycle"], c["code"]) for c in kiq026} == {
        ("2013-2014", 7), ("2013-2014", 9), ("2015-2016", 7), ("2015-2016", 9)}
    # every file read is hashed, with the config and the food-code map
    hashed = {Path(k).name.upper() for k in manifest["inputs_sha256"]}
    assert {"STUDY.YAML", "DEMO_H.XPT", "KIQ_U_I.XPT", "DR1IFF_H.XPT", "FOODS.YAML"} <= hashed
    html = (out / "report.html").read_text()
    assert "day-1 dietary recall weight" in html and "WTDRD1" in html
    assert "divided by 2, the number of cycles combined" in html
    assert "National Health and Nutrition Examination Survey" in html


def test_only_the_files_the_config_needs_are_read(tmp_path, files):
    text = CONFIG.split("models:")[0] + "prevalence: {outcome: stone_ever, by: [sex]}\n"
    config = study(tmp_path, files, text)
    for path in (tmp_path / "files").iterdir():   # only demographics and kidney files left
        if not path.stem.upper().startswith(("DEMO", "KIQ_U")):
            path.unlink()
    results = cohortstone.run(config, write=False)
    source = results.manifest["source"]
    assert source["components"] == ["demographics", "kidney"]
    assert set(source["weights"]["variables"].values()) == {"WTINT2YR"}
    assert "interview weight" in source["weights"]["text"]


def test_check_prints_per_cycle_files_rows_and_stone_answers(tmp_path, files, capsys):
    config = study(tmp_path, files)
    assert main(["check", str(config)]) == 0
    out = capsys.readouterr().out
    assert "2013-2014:" in out and "2015-2016:" in out
    assert "KIQ026 answers: 1 " in out and "KID028 answers: answered" in out
    assert "KIQ029 answers:" in out
    assert "weight: WTDRD1 (day-1 dietary subsample); 2013-2014 × 0.5, 2015-2016 × 0.5" in out
    assert "design: 12 strata, 24 clusters" in out


def test_a_missing_component_file_is_named_with_what_needs_it(tmp_path, files, capsys):
    config = study(tmp_path, files, cache=True)
    next(p for p in (tmp_path / "files").iterdir() if p.stem.upper() == "DR1TOT_I").unlink()
    before = snapshot(tmp_path)
    assert main(["run", str(config), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert "2015-2016: DR1TOT_I.xpt (day-1 total nutrient intakes" in err
    assert "needed for `water_l_day`" in err and "cohortstone fetch" in err
    assert not (tmp_path / "out").exists() and snapshot(tmp_path) == before


@pytest.mark.parametrize("edit, message", [
    ("wrong_cycle_file", "has SDDSRVYR 9, but 2013-2014 files have 8"),
    ("missing_variable", "KIQ_U_H.xpt lacks the variable(s) KIQ026"),
    ("stranger", "who are not in DEMO_H.xpt"),
], ids=["file-of-another-cycle", "variable-missing", "respondent-not-in-demographics"])
def test_files_that_do_not_fit_are_refused_naming_the_file(tmp_path, files, capsys, edit,
                                                           message):
    import pyreadstat
    config = study(tmp_path, files, cache=True)
    folder = tmp_path / "files"
    find = {p.stem.upper(): p for p in folder.iterdir()}
    if edit == "wrong_cycle_file":
        shutil.copy(find["DEMO_I"], find["DEMO_H"])
    else:
        kidney, _ = pyreadstat.read_xport(str(find["KIQ_U_H"]))
        if edit == "missing_variable":
            kidney = kidney.drop(columns="KIQ026")
        else:
            kidney.loc[0, "SEQN"] = 1.0
        find["KIQ_U_H"].unlink()
        pyreadstat.write_xport(kidney, str(folder / "KIQ_U_H.xpt"), file_format_version=5,
                               table_name="KIQ_U_H")
    assert main(["run", str(config), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()
    assert not (folder / ".cohortstone-cache").exists(), "nothing is cached from bad files"


@pytest.mark.parametrize("data, message", [
    ("{source: nhanes, cycles: [2015-2016]}", "the required key `dir` is missing"),
    ("{source: nhanes, dir: files}", "the required key `cycles` is missing"),
    ("{source: nhanes, dir: files, cycles: [2015-2016, 2015-2016]}",
     "the cycle '2015-2016' is listed twice"),
    ("{source: nhanes, dir: files, cycles: []}", "expected a list of survey cycles"),
    ("{source: nhanes, dir: files, cycles: [2015-2016], foods: map.txt}",
     "key `data.foods` (line 2): expected a .yaml file"),
    ("{source: nhanes, dir: files, cycles: [2015-2016], path: x.csv}",
     "key `data.path` (line 2): unknown key"),
], ids=["no-dir", "no-cycles", "duplicate", "empty-cycles", "foods-not-yaml", "table-key"])
def test_bad_data_keys_are_config_errors_with_lines(tmp_path, data, message):
    config = tmp_path / "study.yaml"
    config.write_text(f"name: x\ndata: {data}\nprevalence: {{outcome: stone_ever}}\n")
    with pytest.raises(ConfigError) as caught:
        cohortstone.check(config)
    assert message in str(caught.value)


def test_rename_applies_to_the_harmonized_columns(tmp_path, files):
    text = CONFIG.replace("  cycles: [2013-2014, 2015-2016]\n",
                          "  cycles: [2013-2014, 2015-2016]\n  rename: {water_l_day: water}\n")
    text = text.replace("exposure: water_l_day", "exposure: water").replace(
        "[age_years, water_l_day, citrus_juice_ml_day]", "[age_years, water]")
    results = cohortstone.run(study(tmp_path, files, text), write=False)
    assert "water" in set(results.odds_ratios["term"])
    assert results.manifest["source"]["weights"]["level"] == "day-1 dietary"


def test_the_example_config_runs_on_files_in_its_layout(tmp_path):
    """configs/nhanes-example.yaml, pointed at INVENTED files of its four cycles."""
    example = Path(__file__).parents[2] / "configs" / "nhanes-example.yaml"
    write_survey(tmp_path / "data" / "nhanes", ["2011-2012", "2013-2014", "2015-2016",
                                                "2017-2020"], n=450)
    (tmp_path / "configs").mkdir()
    shutil.copy(example, tmp_path / "configs" / example.name)   # dir: ../data/nhanes
    assert main(["run", str(tmp_path / "configs" / example.name), "--out",
                 str(tmp_path / "out")]) == 0
    manifest = json.loads((tmp_path / "out" / "nhanes-water" / "manifest.json").read_text())
    factors = manifest["source"]["weights"]["factors"]
    assert factors["2011-2012"] == pytest.approx(2 / 9.2)
    assert factors["2017-2020"] == pytest.approx(3.2 / 9.2)
