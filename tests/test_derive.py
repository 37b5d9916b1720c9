"""The `derive` block: groups by cut points and unit changes, made right after loading."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cohortstone.config.spec import DeriveSpec
from cohortstone.derive import apply_derive, group_labels
from cohortstone.errors import DataError


def test_whole_cut_points_give_closed_age_groups():
    assert group_labels((20, 40, 60)) == ["20-39", "40-59", "60+"]
    assert group_labels((0.5, 1.5)) == ["0.5-<1.5", "1.5+"]


def test_groups_unit_changes_and_missing_below_the_first_cut():
    frame = pd.DataFrame({"age_years": [12, 20, 39, 40, 59.5, 60, 80, np.nan],
                          "water_l_day": [0.5, 1, 2, 0, 0, 0, 0, np.nan]})
    out = apply_derive(frame, (DeriveSpec("age_group", "age_years", cuts=(20, 40, 60)),
                               DeriveSpec("water_ml_day", "water_l_day", times=1000)))
    groups = out["age_group"]
    assert groups.isna().tolist() == [True] + [False] * 6 + [True]
    assert groups.dropna().tolist() == ["20-39", "20-39", "40-59", "40-59", "60+", "60+"]
    assert list(out["age_group"].cat.categories) == ["20-39", "40-59", "60+"]
    assert out["water_ml_day"].tolist()[:3] == [500, 1000, 2000]
    assert "age_group" not in frame.columns, "the input frame is never modified"


def test_deriving_from_a_missing_or_text_column_is_a_data_error():
    frame = pd.DataFrame({"sex": ["f", "m"]})
    with pytest.raises(DataError, match="derive.g.from: column `age` is not in the data"):
        apply_derive(frame, (DeriveSpec("g", "age", cuts=(1,)),))
    with pytest.raises(DataError, match="must hold numbers"):
        apply_derive(frame, (DeriveSpec("g", "sex", times=2),))
