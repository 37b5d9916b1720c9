"""The population grammar: what it accepts, what it refuses, and three-valued missing logic."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cohortstone.config.conditions import ConditionSyntaxError, evaluate, parse_condition
from cohortstone.errors import DataError

FRAME = pd.DataFrame({
    "age_years": [15, 20, 45, np.nan, 70],
    "sex": ["female", "male", "male", "female", None],
    "diabetes": [0, 1, 0, 1, np.nan],
})


def rows(text: str) -> list[int]:
    return np.flatnonzero(evaluate(parse_condition(text), FRAME)).tolist()


@pytest.mark.parametrize("text, expected", [
    ("age_years >= 20", [1, 2, 4]),
    ("age_years < 20", [0]),
    ("age_years == 45", [2]),
    ("age_years != 45", [0, 1, 4]),          # missing age is unknown, so not selected
    ("sex == 'male'", [1, 2]),
    ('sex == "female"', [0, 3]),
    ("sex in ['female', 'male']", [0, 1, 2, 3]),
    ("sex not in ['female']", [1, 2]),
    ("age_years is missing", [3]),
    ("sex is not missing", [0, 1, 2, 3]),
    ("age_years >= 20 and sex == 'male'", [1, 2]),
    ("age_years < 20 or diabetes == 1", [0, 1, 3]),
    ("not (age_years >= 20)", [0]),
    ("(age_years >= 20 or sex == 'female') and diabetes == 0", [0, 2]),
    ("age_years >= 20 and age_years <= 60 or sex is missing", [1, 2, 4]),  # and binds tighter
    ("diabetes in [1]", [1, 3]),
    ("age_years > -1e3", [0, 1, 2, 4]),
])
def test_conditions_select_the_expected_rows(text, expected):
    assert rows(text) == expected


def test_unknown_or_false_is_false_but_unknown_or_true_is_true():
    # Kleene logic, as in SQL: row 3 has a missing age
    assert rows("age_years > 100 or sex == 'female'") == [0, 3]
    assert rows("not (age_years > 100)") == [0, 1, 2, 4]


@pytest.mark.parametrize("text, where", [
    ("__import__('os').system('ls')", "position 17"),
    ("age_years >= ", "end of the condition"),
    ("age_years => 20", "position 11"),
    ("age_years >= 20; rm -rf /", "position 16"),
    ("sex == female", "quoted text"),
    ("(age_years >= 20", "expected `)`"),
    ("age_years >= 20 age_years", "expected end"),
    ("lambda: 1", "position 7"),
    ("", "non-empty"),
])
def test_anything_outside_the_grammar_is_refused_with_its_position(text, where):
    with pytest.raises(ConditionSyntaxError, match=None) as info:
        parse_condition(text)
    assert where in str(info.value)


def test_text_compared_with_a_number_is_a_data_error():
    with pytest.raises(DataError, match="column `sex` holds text"):
        evaluate(parse_condition("sex == 1"), FRAME)


def test_conditions_list_their_columns():
    cond = parse_condition("age_years >= 20 and (sex == 'male' or diabetes is missing)")
    assert cond.columns() == ["age_years", "diabetes", "sex"]
