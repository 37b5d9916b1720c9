"""Config validation: the contract's keys, defaults, line numbers and close-match hints."""
from __future__ import annotations

from pathlib import Path

import pytest

from cohortstone.config.load import load_yaml
from cohortstone.config.spec import parse_study
from cohortstone.errors import ConfigError

DEMO = Path(__file__).parents[2] / "configs" / "demo.yaml"


def study(text: str, tmp_path: Path):
    path = tmp_path / "study.yaml"
    path.write_text(text)
    return parse_study(load_yaml(path))


def problems(text: str, tmp_path: Path) -> list[str]:
    with pytest.raises(ConfigError) as info:
        study(text, tmp_path)
    return info.value.problems


def test_the_demo_config_parses_to_frozen_specs():
    spec = parse_study(load_yaml(DEMO))
    assert spec.name == "demo" and spec.data.source == "demo"
    assert [m.name for m in spec.models][:2] == ["water-groups", "water-per-litre"]
    assert spec.models[0].cuts == (0.5, 1.5)
    assert spec.models[0].reference == (("sex", "female"),)
    assert spec.design.single_cluster_strata == "error"
    assert spec.derive[0].cuts == (20.0, 40.0, 60.0)
    with pytest.raises(AttributeError):
        spec.name = "other"  # type: ignore[misc]


def test_defaults_are_those_of_the_contract(tmp_path):
    s = study("name: a\ndata: {source: demo}\n"
              "models: [{name: m, outcome: stone_ever, exposure: water_l_day}]\n", tmp_path)
    model = s.models[0]
    assert (model.type, model.per, model.cuts, model.quantiles) == ("logistic", 1.0, None, None)
    assert s.output == Path("reports") and s.design is None and s.population == ()


def test_table_paths_are_relative_to_the_config_file(tmp_path):
    s = study("name: a\ndata: {source: table, path: data/x.csv}\n"
              "models: [{name: m, outcome: y, exposure: x}]\n", tmp_path)
    assert s.data.path == tmp_path.resolve() / "data" / "x.csv"


def test_a_dict_config_is_accepted_for_notebooks():
    raw = load_yaml({"name": "a", "data": {"source": "demo"},
                     "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day"}]})
    assert parse_study(raw).name == "a"


@pytest.mark.parametrize("snippet, message", [
    ("per: 1, cuts: [1, 2]", "give at most one of `per`, `cuts`, `quantiles`"),
    ("cuts: [2, 1]", "cut points must increase strictly"),
    ("quantiles: 1", "expected a whole number from 2 to 10"),
    ("adjust: [water_l_day]", "is also listed in `adjust`"),
    ("reference: {bmi: '1'}", "neither the exposure nor in `adjust`"),
    ("type: recurrence", "recurrence models take `event` (or `event_date`) for the recurrence"),
    ("categorical: [race]", "`race` is neither the exposure nor in `adjust`"),
    ("expsure: x", "Did you mean `exposure`?"),
])
def test_model_mistakes_are_named_with_key_and_line(snippet, message, tmp_path):
    found = problems("name: a\ndata: {source: demo}\nmodels:\n"
                     f"  - {{name: m, outcome: stone_ever, exposure: water_l_day, {snippet}}}\n",
                     tmp_path)
    assert any(message in p and "(line 4)" in p for p in found), found


def test_duplicate_keys_and_model_names_are_refused(tmp_path):
    assert "appears twice" in problems("name: a\nname: b\n", tmp_path)[0]
    found = problems("name: a\ndata: {source: demo}\nmodels:\n"
                     "  - {name: m, outcome: stone_ever, exposure: water_l_day}\n"
                     "  - {name: m, outcome: stone_ever, exposure: bmi}\n", tmp_path)
    assert any("used twice" in p for p in found)


def test_derive_needs_exactly_one_rule(tmp_path):
    found = problems("name: a\ndata: {source: demo}\n"
                     "derive: {g: {from: age_years, cuts: [1], times: 2}}\n"
                     "models: [{name: m, outcome: stone_ever, exposure: water_l_day}]\n",
                     tmp_path)
    assert any("exactly one of `cuts`" in p and "line 3" in p for p in found)


def test_design_rule_must_be_known(tmp_path):
    found = problems("name: a\ndata: {source: demo}\n"
                     "design: {weight: weight, single_cluster_strata: average}\n"
                     "models: [{name: m, outcome: stone_ever, exposure: water_l_day}]\n",
                     tmp_path)
    assert any("expected one of error, overall_mean" in p for p in found)


def test_yaml_tags_that_would_build_objects_are_refused(tmp_path):
    found = problems("name: !!python/object/apply:os.system ['ls']\n", tmp_path)
    assert "line 1: the YAML tag `tag:yaml.org,2002:python/object/apply:os.system` is not " \
        "allowed" in found[0]


@pytest.mark.parametrize("block, message", [
    ("{outcome: stone_ever, standardize: adult4}", "expected one of adult3, all_ages11"),
    ("{outcome: stone_ever, standardize: {cuts: [20, 40], weights: [1]}}",
     "expected one weight per age group (2 groups"),
    ("{outcome: stone_ever, by: sex, standardise: adult3}", "Did you mean `standardize`?"),
    ("{by: [sex]}", "the required key `outcome` is missing"),
])
def test_prevalence_block_mistakes_are_named(block, message, tmp_path):
    found = problems(f"name: a\ndata: {{source: demo}}\nprevalence: {block}\n", tmp_path)
    assert any(message in p and "(line 3)" in p for p in found), found


def test_a_config_must_ask_for_something(tmp_path):
    found = problems("name: a\ndata: {source: demo}\n", tmp_path)
    assert any("nothing to estimate" in p for p in found)
