"""NCHS presentation standards for proportions, exercised at their boundaries by hand.

Rules from Parker JD et al., NCHS Data Presentation Standards for Proportions, Vital Health
Stat 2(175), 2017: effective n < 30 suppress; CI width >= 0.30 suppress; width > 0.05 with
relative width > 130% suppress; df < 8 review. The order of the checks and the review of
0%/100% estimates are ours (from memory of the standard's flowchart; see the module).
"""
from __future__ import annotations

import pytest

from cohortstone.reliability import design_effect, effective_n, judge


@pytest.mark.parametrize("p, lower, upper, n_eff, df, word, reason", [
    # effective sample size boundary: 30 is enough, 29.9 is not
    (0.5, 0.45, 0.55, 30.0, 20, "ok", ""),
    (0.5, 0.45, 0.55, 29.9, 20, "suppress", "effective sample size 29.9 is below 30"),
    # absolute width boundary: 0.2999 passes this rule, 0.30 fails it
    (0.5, 0.35, 0.6499, 100, 20, "ok", ""),
    (0.5, 0.35, 0.65, 100, 20, "suppress", "width 0.300 is 0.3 or more"),
    # relative width boundary (width 0.065 > 0.05): 0.065/0.05 = 130% passes, 0.0651 fails
    (0.05, 0.02, 0.085, 100, 20, "ok", ""),
    (0.05, 0.02, 0.0851, 100, 20, "suppress", "relative interval width 130% exceeds 130%"),
    # a narrow interval (width <= 0.05) is presented whatever its relative width
    (0.01, 0.001, 0.051, 100, 20, "ok", ""),
    # df boundary: 8 is enough, 7 calls for review
    (0.5, 0.45, 0.55, 100, 8, "ok", ""),
    (0.5, 0.45, 0.55, 100, 7, "review", "only 7 degrees of freedom (below 8)"),
    # no degrees of freedom at all: nothing can be said about the precision
    (0.5, float("nan"), float("nan"), 100, 0, "suppress", "no design degrees of freedom"),
    # an estimate of 0% with a narrow interval is presented for review
    (0.0, 0.0, 0.04, 100, 20, "review", "the estimate is 0% or 100%"),
    (0.0, 0.0, 0.06, 100, 20, "suppress", "relative interval width infinite"),
])
def test_the_standard_at_its_boundaries(p, lower, upper, n_eff, df, word, reason):
    got_word, got_reason = judge(p, lower, upper, n_eff, df)
    assert got_word == word
    assert reason in got_reason


def test_effective_n_is_n_over_the_design_effect_never_above_n():
    # p = 0.2, n = 400: SRS variance 0.2*0.8/400 = 0.0004; a design variance of 0.001 is a
    # design effect of 2.5 and an effective sample size of 160 (hand computed)
    assert design_effect(0.001, 0.2, 400) == pytest.approx(2.5)
    assert effective_n(400, 2.5) == pytest.approx(160)
    assert effective_n(400, 0.8) == 400  # a design effect below 1 does not add information
