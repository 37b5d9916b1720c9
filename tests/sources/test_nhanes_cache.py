"""The harmonized parquet cache: keyed by the inputs' SHA-256, so reruns skip the XPT parsing
and never read a stale table. Files are INVENTED (test_nhanes_layout.py)."""
from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd
import pytest

import cohortstone
from cohortstone.config.spec import DataSpec
from cohortstone.sources import nhanes
from cohortstone.sources.nhanes import merge as loader
from test_nhanes_layout import write_survey

COLUMNS = ["stone_ever", "age_years", "sex", "water_l_day", "coffee_ml_day"]


@pytest.fixture()
def folder(tmp_path_factory) -> Path:
    made = tmp_path_factory.mktemp("files")
    write_survey(made, ["2015-2016"], n=250)
    return made


def spec(folder: Path, cache: Path | None = None) -> DataSpec:
    return DataSpec(source="nhanes", dir=folder, cycles=("2015-2016",),
                    cache=cache if cache is not None else folder / ".cohortstone-cache")


def no_parsing(monkeypatch):
    def refuse(path):
        raise AssertionError(f"{path} was parsed although the cache holds the table")
    monkeypatch.setattr(loader, "read_xpt", refuse)


def test_a_rerun_reads_the_cache_instead_of_the_files(folder, monkeypatch):
    first, record = nhanes.load(spec(folder), COLUMNS)
    assert record["cache"]["status"] == "written"
    entries = list((folder / ".cohortstone-cache").glob("*.parquet"))
    assert len(entries) == 1 and len(entries[0].stem) == 64      # a SHA-256 in hex
    no_parsing(monkeypatch)
    again, cached = nhanes.load(spec(folder), COLUMNS)
    assert cached["cache"]["status"] == "read"
    pd.testing.assert_frame_equal(first, again)
    assert cached["weights"] == record["weights"]
    assert cached["missing_codes"] == record["missing_codes"]
    assert [f["sha256"] for f in cached["files"]] == [f["sha256"] for f in record["files"]]


def test_a_changed_input_file_changes_the_key(folder, monkeypatch):
    nhanes.load(spec(folder), COLUMNS)
    kidney = next(p for p in folder.iterdir() if p.stem.upper() == "KIQ_U_I")
    other = folder.parent / "other"
    write_survey(other, ["2015-2016"], n=250, seed=99, components=["kidney"], case="upper")
    shutil.copy(other / "KIQ_U_I.xpt", kidney)
    _, record = nhanes.load(spec(folder), COLUMNS)
    assert record["cache"]["status"] == "written", "new content, new entry"
    assert len(list((folder / ".cohortstone-cache").glob("*.parquet"))) == 2


def test_other_columns_need_other_files_and_so_another_entry(folder):
    nhanes.load(spec(folder), COLUMNS)
    _, record = nhanes.load(spec(folder), ["stone_ever", "bmi"])
    assert record["cache"]["status"] == "written"
    assert record["components"] == ["demographics", "body_measures", "kidney"]


def test_a_damaged_cache_file_is_rebuilt(folder):
    nhanes.load(spec(folder), COLUMNS)
    entry = next((folder / ".cohortstone-cache").glob("*.parquet"))
    entry.write_bytes(b"not parquet")
    frame, record = nhanes.load(spec(folder), COLUMNS)
    assert record["cache"]["status"] == "written" and len(frame) == 250


def test_a_cache_folder_that_cannot_be_written_only_means_no_cache(folder, tmp_path):
    blocked = tmp_path / "a_file"
    blocked.write_text("in the way")
    frame, record = nhanes.load(spec(folder, cache=blocked / "cache"), COLUMNS)
    assert record["cache"]["status"].startswith("not written")
    assert len(frame) == 250


def test_check_reads_but_never_writes_the_cache(folder, tmp_path):
    config = tmp_path / "study.yaml"
    config.write_text(f"name: c\ndata: {{source: nhanes, dir: {folder}, cycles: [2015-2016]}}\n"
                      "prevalence: {outcome: stone_ever}\n")
    summary = cohortstone.check(config)
    assert "cache: not written (check only reads the cache)" in summary
    assert not (folder / ".cohortstone-cache").exists()
    cohortstone.run(config, write=False)
    assert "(cache: read)" in cohortstone.check(config)


def test_what_depends_on_the_configs_columns_is_never_taken_from_the_cache(folder):
    nhanes.load(spec(folder), COLUMNS)
    _, record = nhanes.load(spec(folder), ["stone_ever", "tea_ml_day", "stone_passed_count"])
    assert record["cache"]["status"] == "read", "same files, same table"
    assert "`tea_ml_day`" in record["weights"]["reason"]
    assert "coffee" not in record["weights"]["reason"]
    assert any("`stone_passed_count` is not in the 2015-2016 files" in n
               for n in record["notes"])
