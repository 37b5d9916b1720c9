"""The design: weights checked, clusters nested in strata, variance and df by hand."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cohortstone.config.spec import DesignSpec
from cohortstone.design import (cluster_totals, covariance_of_totals, degrees_of_freedom,
                                make_design, single_cluster_strata)
from cohortstone.errors import DataError, DesignError

# Two strata: stratum 1 has clusters a, b; stratum 2 has clusters a, b, c (labels reused
# across strata, so nesting matters).
FRAME = pd.DataFrame({
    "w": [1.0, 2.0, 1.0, 3.0, 1.0, 1.0, 2.0],
    "h": [1, 1, 1, 2, 2, 2, 2],
    "c": ["a", "a", "b", "a", "b", "c", "c"],
    "y": [1.0, 0.0, 2.0, 1.0, 4.0, 0.0, 1.0],
})
SPEC = DesignSpec(weight="w", strata="h", cluster="c")


def test_clusters_are_nested_in_strata():
    d = make_design(FRAME, SPEC)
    assert d.n_strata == 2 and d.n_clusters == 5
    assert d.cluster.tolist() == [0, 0, 1, 2, 3, 4, 4]


def test_variance_of_a_weighted_total_matches_the_hand_formula():
    # common practice, no source: with-replacement variance of a total,
    # Σ_h n_h/(n_h−1) Σ_c (z_hc − z̄_h)²
    d = make_design(FRAME, SPEC)
    z = cluster_totals(d, FRAME[["y"]].to_numpy(), FRAME["w"].to_numpy())[:, 0]
    assert z.tolist() == [1.0, 2.0, 3.0, 4.0, 2.0]
    s1 = 2 / 1 * ((1 - 1.5) ** 2 + (2 - 1.5) ** 2)
    s2 = 3 / 2 * ((3 - 3) ** 2 + (4 - 3) ** 2 + (2 - 3) ** 2)
    assert covariance_of_totals(d, z[:, None])[0, 0] == pytest.approx(s1 + s2, rel=1e-14)


def test_df_counts_only_strata_and_clusters_holding_domain_members():
    d = make_design(FRAME, SPEC)
    everyone = np.ones(7, bool)
    assert degrees_of_freedom(d, everyone) == 5 - 2
    only_stratum_2 = FRAME["h"].eq(2).to_numpy()
    assert degrees_of_freedom(d, only_stratum_2) == 3 - 1
    two_clusters = FRAME["c"].isin(["a"]).to_numpy()
    assert degrees_of_freedom(d, two_clusters) == 2 - 2


def test_single_cluster_strata_are_refused_or_centred_on_the_overall_mean():
    lonely = FRAME.assign(h=[1, 1, 1, 2, 2, 3, 3], c=["a", "a", "b", "a", "b", "c", "c"])
    with pytest.raises(DesignError, match=r"1 stratum/strata hold a single cluster \(3\)"):
        make_design(lonely, SPEC)
    d = make_design(lonely, DesignSpec(weight="w", strata="h", cluster="c",
                                       single_cluster_strata="overall_mean"))
    assert single_cluster_strata(d) == [3]
    z = np.array([[1.0], [2.0], [3.0], [4.0], [2.0]])
    mean = z.mean()
    expected = 2 * ((1 - 1.5) ** 2 + (2 - 1.5) ** 2) + 2 * ((3 - 3.5) ** 2 + (4 - 3.5) ** 2) \
        + (2 - mean) ** 2
    assert covariance_of_totals(d, z)[0, 0] == pytest.approx(expected, rel=1e-14)


def test_without_clusters_each_row_is_its_own_cluster():
    d = make_design(FRAME, DesignSpec(weight="w", strata="h"))
    assert d.n_clusters == 7 and degrees_of_freedom(d, np.ones(7, bool)) == 7 - 2


@pytest.mark.parametrize("change, message", [
    ({"w": [1, -2, 1, 1, 1, 1, 1]}, "1 negative or infinite weight"),
    ({"w": [1, np.nan, 1, 1, 1, 1, 1]}, "1 missing value"),
    ({"w": list("abcdefg")}, "must hold numbers"),
    ({"h": [1, None, 1, 2, 2, 2, 2]}, "design.strata: column `h` has 1 missing"),
])
def test_bad_design_columns_are_data_errors(change, message):
    with pytest.raises(DataError, match=message):
        make_design(FRAME.assign(**change), SPEC)


def test_a_missing_design_column_is_named_with_a_suggestion():
    with pytest.raises(DataError, match="design.cluster: column `cc` is not in the data. "
                                        "Did you mean `c`?"):
        make_design(FRAME, DesignSpec(weight="w", strata="h", cluster="cc"))
