"""The command line: bad input is refused with exit code 2, one clear paragraph, no output."""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from cohortstone.cli import main
from tests.helpers import folder_listing, write_bad_inputs

BAD = sorted((Path(__file__).parent / "configs" / "bad").glob("*.yaml"))


@pytest.fixture(scope="module")
def data_folder(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("inputs")
    write_bad_inputs(folder)
    return folder


def expected_message(config: Path) -> str:
    first = config.read_text().splitlines()[0]
    assert first.startswith("# expect: "), f"{config.name} must name its message on line 1"
    return first.removeprefix("# expect: ")


@pytest.mark.parametrize("config", BAD, ids=[p.stem for p in BAD])
def test_bad_config_is_refused_cleanly(config, data_folder, tmp_path, capsys):
    work = tmp_path / "work"
    shutil.copytree(data_folder, work)
    shutil.copy(config, work / config.name)
    before = {p: p.read_bytes() for p in work.iterdir()}
    out = tmp_path / "reports"

    code = main(["run", str(work / config.name), "--out", str(out)])

    captured = capsys.readouterr()
    assert code == 2
    assert expected_message(config) in captured.err
    assert captured.err.startswith("cohortstone: error: ")
    assert "Traceback" not in captured.err
    assert not out.exists(), "a refused run must leave no output folder"
    assert {p: p.read_bytes() for p in work.iterdir()} == before, "inputs must not change"
    assert not (work / "pwned").exists()


@pytest.mark.parametrize("config", BAD, ids=[p.stem for p in BAD])
def test_check_refuses_the_same_configs(config, data_folder, tmp_path, capsys):
    work = tmp_path / "work"
    shutil.copytree(data_folder, work)
    shutil.copy(config, work / config.name)
    assert main(["check", str(work / config.name)]) == 2
    assert expected_message(config) in capsys.readouterr().err


def test_console_script_prints_no_traceback_and_exits_2(data_folder, tmp_path):
    config = tmp_path / "bad.yaml"
    config.write_text("name: bad\ndata: {source: demo}\nmodels: [{name: m, outcome: x}]\n")
    result = subprocess.run([sys.executable, "-m", "cohortstone", "run", str(config)],
                            capture_output=True, text=True, cwd=tmp_path)
    assert result.returncode == 2
    assert "Traceback" not in result.stderr
    assert "the required key `exposure` is missing" in result.stderr
    assert folder_listing(tmp_path) == ["bad.yaml"]


def test_debug_flag_shows_the_traceback(tmp_path):
    config = tmp_path / "bad.yaml"
    config.write_text("name: bad\ndata: {source: demo}\nmodels: [{name: m, outcome: x}]\n")
    result = subprocess.run([sys.executable, "-m", "cohortstone", "check", str(config),
                             "--debug"], capture_output=True, text=True, cwd=tmp_path)
    assert result.returncode != 0
    assert "Traceback" in result.stderr and "ConfigError" in result.stderr


def test_every_problem_in_a_config_is_reported_in_one_pass(tmp_path, capsys):
    config = tmp_path / "many.yaml"
    config.write_text(
        "name: Bad Name\n"
        "data: {source: demo}\n"
        "desgin: {weight: weight}\n"
        "models:\n"
        "  - {name: m, type: logistc, outcome: stone_ever, exposure: water_l_day, per: -1}\n")
    assert main(["check", str(config)]) == 2
    err = capsys.readouterr().err
    assert "4 problems" in err
    assert "key `name` (line 1)" in err
    assert "key `desgin` (line 3): unknown key. Did you mean `design`?" in err
    assert "key `models[0].type` (line 5)" in err and "Did you mean `logistic`?" in err
    assert "key `models[0].per` (line 5): expected a number above 0" in err


def test_check_validates_without_writing(tmp_path, capsys):
    config = Path(__file__).parents[1] / "configs" / "demo.yaml"
    assert main(["check", str(config)]) == 0
    out = capsys.readouterr().out
    assert "config `demo`: valid" in out and "design: 15 strata, 35 clusters" in out
