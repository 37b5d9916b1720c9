"""A published worked example: open surgery vs percutaneous nephrolithotomy for kidney stones.

The 2×2×2 table of treatment success by treatment and stone size is the textbook case of
Simpson's paradox: open surgery succeeds more often within both stone sizes, yet less often
overall, because it was mostly given for the harder, large stones. Every number checked below is
computed by hand from the published counts, so the test needs no other program.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import cohortstone

# Charig et al., BMJ 1986;292:879–882, table (as published)
#   (treatment, stone size): (successes, patients treated)
CHARIG = {
    ("open surgery", "small"): (81, 87),
    ("open surgery", "large"): (192, 263),
    ("percutaneous", "small"): (234, 270),
    ("percutaneous", "large"): (55, 80),
}


def _cells(sizes: tuple[str, ...]) -> tuple[int, int, int, int]:
    """a, b, c, d of the 2×2 table success × treatment (open surgery exposed) over `sizes`."""
    a = sum(CHARIG[("open surgery", s)][0] for s in sizes)            # open, success
    b = sum(CHARIG[("open surgery", s)][1] - CHARIG[("open surgery", s)][0] for s in sizes)
    c = sum(CHARIG[("percutaneous", s)][0] for s in sizes)            # percutaneous, success
    d = sum(CHARIG[("percutaneous", s)][1] - CHARIG[("percutaneous", s)][0] for s in sizes)
    return a, b, c, d


def _cross_product(sizes: tuple[str, ...]) -> float:
    a, b, c, d = _cells(sizes)
    return (a * d) / (b * c)


def test_table_counts_as_published():
    # the published totals: 273/350 (78%) open surgery, 289/350 (83%) percutaneous
    assert _cells(("small", "large")) == (273, 77, 289, 61)
    # the hand computation the crude check below relies on
    assert _cross_product(("small", "large")) == (273 * 61) / (77 * 289)
    assert _cross_product(("small",)) == (81 * 36) / (6 * 234)
    assert _cross_product(("large",)) == (192 * 25) / (71 * 55)


@pytest.fixture(scope="module")
def table_csv(tmp_path_factory) -> str:
    """One row per patient: success 0/1, treatment and stone size as text."""
    rows = []
    for (treatment, size), (successes, treated) in CHARIG.items():
        rows += [{"treatment": treatment, "stone_size": size, "success": 1}] * successes
        rows += [{"treatment": treatment, "stone_size": size, "success": 0}] * (treated - successes)
    frame = pd.DataFrame(rows)
    assert len(frame) == 700 and frame["success"].sum() == 273 + 289
    path = tmp_path_factory.mktemp("charig") / "charig_1986.csv"
    frame.to_csv(path, index=False)
    return str(path)


def _config(path: str, population: list[str] | None = None) -> dict:
    config = {
        "name": "charig-1986",
        "data": {"source": "table", "path": path},
        "models": [
            {"name": "crude", "outcome": "success", "exposure": "treatment",
             "reference": {"treatment": "percutaneous"}},
            {"name": "size-adjusted", "outcome": "success", "exposure": "treatment",
             "adjust": ["stone_size"], "reference": {"treatment": "percutaneous"}},
        ],
    }
    if population:
        config["population"] = population
        config["models"] = config["models"][:1]
    return config


def _exposure_row(table: pd.DataFrame, model: str) -> pd.Series:
    rows = table[(table["model"] == model) & (table["term"] == "treatment")
                 & (table["level"] == "open surgery")]
    assert len(rows) == 1
    return rows.iloc[0]


@pytest.fixture(scope="module")
def overall(table_csv) -> pd.DataFrame:
    return cohortstone.run(_config(table_csv), write=False).odds_ratios


def test_crude_odds_ratio_is_the_cross_product(overall):
    row = _exposure_row(overall, "crude")
    assert row["flag"] == ""
    # 2×2 cross-product of the pooled table, by hand: (a·d)/(b·c) = (273·61)/(77·289)
    assert row["odds_ratio"] == pytest.approx((273 * 61) / (77 * 289), rel=0, abs=1e-10)
    assert row["log_odds_ratio"] == pytest.approx(math.log((273 * 61) / (77 * 289)), abs=1e-10)
    assert (row["n"], row["cases"]) == (350, 273)
    reference = overall[(overall["model"] == "crude") & (overall["level"] == "percutaneous")]
    assert reference["odds_ratio"].tolist() == [1.0]
    assert (reference["n"].item(), reference["cases"].item()) == (350, 289)


def test_crude_standard_error_is_woolf(overall):
    row = _exposure_row(overall, "crude")
    a, b, c, d = 273, 77, 289, 61
    # Woolf 1955, variance of the log odds ratio
    woolf_se = math.sqrt(1 / a + 1 / b + 1 / c + 1 / d)
    assert row["se"] == pytest.approx(woolf_se, rel=0, abs=1e-10)
    # no design: normal reference distribution, Wald interval on the log scale
    assert np.isnan(row["df"])
    z = stats.norm.ppf(0.975)
    log_or = math.log((a * d) / (b * c))
    assert row["ci_lower"] == pytest.approx(math.exp(log_or - z * woolf_se), rel=1e-10)
    assert row["ci_upper"] == pytest.approx(math.exp(log_or + z * woolf_se), rel=1e-10)
    assert row["p_value"] == pytest.approx(2 * stats.norm.sf(abs(log_or) / woolf_se), rel=1e-8)


def test_adjustment_for_stone_size_reverses_the_direction(overall):
    crude = _exposure_row(overall, "crude")
    adjusted = _exposure_row(overall, "size-adjusted")
    assert adjusted["flag"] == ""
    # overall, open surgery looks worse (78% vs 83% success) ...
    assert crude["odds_ratio"] < 1
    # ... but within stone size it does better: Simpson's paradox
    assert adjusted["odds_ratio"] > 1
    # a common odds ratio fitted across the two strata lies between the stratum-specific ones
    assert _cross_product(("large",)) < adjusted["odds_ratio"] < _cross_product(("small",))
    size_rows = overall[(overall["model"] == "size-adjusted") & (overall["term"] == "stone_size")]
    assert size_rows["role"].eq("adjustment").all()


@pytest.mark.parametrize("size", ["small", "large"])
def test_stratum_specific_odds_ratio_is_the_cross_product(table_csv, size):
    config = _config(table_csv, population=[f"stone_size == '{size}'"])
    table = cohortstone.run(config, write=False).odds_ratios
    row = _exposure_row(table, "crude")
    assert row["flag"] == ""
    a, b, c, d = _cells((size,))
    assert row["odds_ratio"] == pytest.approx((a * d) / (b * c), rel=0, abs=1e-10)
    assert row["se"] == pytest.approx(math.sqrt(1 / a + 1 / b + 1 / c + 1 / d), abs=1e-10)
    assert row["odds_ratio"] > 1  # open surgery does better within each stone size
    assert (row["n"], row["cases"]) == (a + b, a)
