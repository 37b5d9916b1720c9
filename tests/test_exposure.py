"""Exposure coding: per-unit, cut points, weighted quantiles, categories and references."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cohortstone.config.spec import ModelSpec
from cohortstone.errors import DataError
from cohortstone.exposure import build, cut_labels, trend_matrix, weighted_quantile


def spec(**kw) -> ModelSpec:
    base = dict(name="m", type="logistic", outcome="y", exposure="x")
    return ModelSpec(**{**base, **kw})


FRAME = pd.DataFrame({
    "y": [0, 1, 0, 1, 0, 1, np.nan, 0],
    "x": [0.2, 0.4, 1.0, 1.2, 2.0, 3.0, 1.0, np.nan],
    "sex": ["f", "m", "m", "f", "f", "m", "m", "f"],
    "code": [1, 2, 3, 1, 2, 3, 1, 2],
})
EVERYONE = np.ones(len(FRAME), bool)
WEIGHT = np.ones(len(FRAME))


def test_weighted_quantile_inverts_the_weighted_distribution():
    values = np.array([1.0, 2.0, 3.0, 4.0])
    assert weighted_quantile(values, np.ones(4), [0.25, 0.5, 0.75]).tolist() == [1, 2, 3]
    # heavy weight on 4 moves the median up: shares 0.1, 0.2, 0.3, 1.0
    assert weighted_quantile(values, np.array([1, 1, 1, 7.0]), 0.5) == 4


def test_cut_points_make_labelled_groups_with_the_first_as_reference():
    m = build(FRAME, spec(cuts=(1, 2)), EVERYONE, WEIGHT)
    assert cut_labels((1, 2)) == ["<1", "1-<2", ">=2"]
    assert m.exposure_coding.levels == ("<1", "1-<2", ">=2")
    assert [c.level for c in m.columns if c.role == "exposure"] == ["1-<2", ">=2"]
    assert m.x[:6, 1].tolist() == [0, 0, 1, 1, 0, 0] and m.x[:6, 2].tolist() == [0, 0, 0, 0, 1, 1]


def test_rows_missing_a_model_column_leave_the_domain_and_are_counted():
    m = build(FRAME, spec(cuts=(1, 2)), EVERYONE, WEIGHT)
    assert m.in_model.tolist() == [True] * 6 + [False, False]
    assert m.dropped == {"missing y": 1, "missing x": 1}
    assert not np.isnan(m.x).any(), "rows outside the domain carry zeros, not NaN"


def test_quantiles_are_weighted_within_the_domain():
    m = build(FRAME, spec(quantiles=2), EVERYONE, WEIGHT)
    assert m.exposure_coding.edges == (1.0,)  # median of 0.2, 0.4, 1.0, 1.2, 2.0, 3.0
    heavy = np.where(FRAME["x"] >= 2, 10.0, 1.0)
    assert build(FRAME, spec(quantiles=2), EVERYONE, heavy).exposure_coding.edges == (2.0,)


def test_the_reference_level_can_be_chosen():
    m = build(FRAME, spec(cuts=(1, 2), reference=(("x", ">=2"),)), EVERYONE, WEIGHT)
    assert m.exposure_coding.levels[0] == ">=2"
    m = build(FRAME, spec(adjust=("sex",), reference=(("sex", "m"),)), EVERYONE, WEIGHT)
    assert [c.level for c in m.columns if c.term == "sex"] == ["f"]
    with pytest.raises(DataError, match="has no level 'x'"):
        build(FRAME, spec(adjust=("sex",), reference=(("sex", "x"),)), EVERYONE, WEIGHT)


def test_numeric_codes_listed_as_categorical_become_indicators():
    m = build(FRAME, spec(adjust=("code",), categorical=("code",)), EVERYONE, WEIGHT)
    assert [c.level for c in m.columns if c.term == "code"] == ["2", "3"]
    plain = build(FRAME, spec(adjust=("code",)), EVERYONE, WEIGHT)
    assert [c.level for c in plain.columns if c.term == "code"] == [""]


def test_the_trend_score_is_the_weighted_median_of_each_group():
    m = build(FRAME, spec(cuts=(1, 2)), EVERYONE, WEIGHT)
    assert m.exposure_coding.medians == (0.2, 1.0, 2.0)
    assert trend_matrix(m)[:6, 1].tolist() == [0.2, 0.2, 1.0, 1.0, 2.0, 2.0]


def test_empty_groups_and_tied_quantiles_are_data_errors():
    with pytest.raises(DataError, match="hold nobody"):
        build(FRAME, spec(cuts=(5, 6)), EVERYONE, WEIGHT)
    tied = FRAME.assign(x=[0, 0, 0, 0, 0, 1, 1, 1])
    with pytest.raises(DataError, match="share boundaries"):
        build(tied, spec(quantiles=4), EVERYONE, WEIGHT)


def test_outcome_must_be_zero_one():
    with pytest.raises(DataError, match="found the values 1, 2"):
        build(FRAME.assign(y=FRAME["y"] + 1), spec(), EVERYONE, WEIGHT)
    with pytest.raises(DataError, match="needs both 0 and 1"):
        build(FRAME.assign(y=0), spec(), EVERYONE, WEIGHT)


def test_people_with_weight_zero_leave_the_domain_with_their_reason():
    weight = np.array([1.0, 0, 1, 1, 1, 1, 1, 0])
    m = build(FRAME, spec(cuts=(1, 2)), EVERYONE, weight)
    assert m.dropped == {"weight 0": 2, "missing y": 1}
    assert not m.in_model[1]
