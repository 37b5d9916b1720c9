"""Small cases worked by hand: Efron's partial likelihood, Kaplan–Meier with Greenwood, the
Aalen–Johansen estimate without deaths, the mean number of recurrences, near-tied times, and a
group without events. All numbers are INVENTED."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import cohortstone
from cohortstone.models import cohort, cox, curves


def test_efron_partial_likelihood_of_two_tied_events_by_hand():
    # times 1, 1, 2, 3 with events 1, 1, 1, 0; x = 0, 1, 0, 1; β = 0.5
    x = np.array([[0.0], [1.0], [0.0], [1.0]])
    rs = cox.risk_sets(np.array([1.0, 1.0, 2.0, 3.0]), np.array([1, 1, 1, 0]))
    e = math.exp(0.5)
    s0, tied = 2 + 2 * e, 1 + e
    # Efron (1977): the second of two tied events sees the risk set minus half their risk
    by_hand = 0.5 - math.log(s0) - math.log(s0 - tied / 2) - math.log(1 + e)
    assert cox.evaluate(x, np.array([0.5]), rs).loglik == pytest.approx(by_hand, rel=1e-14)


def test_score_residuals_add_up_to_the_score_which_is_zero_at_the_fit():
    rng = np.random.default_rng(2)
    x = rng.normal(size=(200, 2))
    stop = np.round(rng.exponential(1, 200), 1) + 0.1
    event = rng.random(200) < 0.7
    rs = cox.risk_sets(stop, event)
    beta = np.array([0.3, -0.2])
    state = cox.evaluate(x, beta, rs)
    residuals = cox.score_residuals(x, state, rs)
    assert residuals.sum(axis=0) == pytest.approx(x.T @ state.martingale, abs=1e-10)
    fit = cox.fit(x, stop, event)
    at_fit = cox.evaluate(x - x.mean(axis=0), fit.coef, rs)
    assert cox.score_residuals(x - x.mean(axis=0), at_fit, rs).sum(axis=0) == pytest.approx(
        [0, 0], abs=1e-8)


def test_kaplan_meier_and_greenwood_by_hand():
    # times 1, 2, 2, 3, 4 with recurrences at 1, 2 and 3 (the other 2 and the 4 censored)
    stop = np.array([1.0, 2.0, 2.0, 3.0, 4.0])
    recurred = np.array([True, True, False, True, False])
    km = curves.kaplan_meier(stop, recurred, np.array([0.5, 1.0, 2.0, 3.0, 5.0]))
    assert km["cumulative_recurrence"].tolist()[:4] == pytest.approx([0.0, 0.2, 0.4, 0.7])
    # Greenwood: Var(S) = S² Σ d / (Y (Y − d)); at 2: 0.6² (1/20 + 1/12)
    assert km["se"].iloc[2] == pytest.approx(0.6 * math.sqrt(1 / 20 + 1 / 12))
    assert km["at_risk"].tolist() == [5, 5, 4, 2, 0]
    assert math.isnan(km["cumulative_recurrence"].iloc[4]), "beyond follow-up: left empty"
    assert (km["ci_lower"].iloc[0], km["ci_upper"].iloc[0]) == (0.0, 0.0)


def test_aalen_johansen_without_deaths_is_one_minus_kaplan_meier():
    rng = np.random.default_rng(4)
    stop = np.round(rng.exponential(3, 300), 1) + 0.1
    recurred = rng.random(300) < 0.6
    at = np.array([0.5, 1.0, 2.0, 5.0])
    aj = curves.aalen_johansen(stop, recurred, np.zeros(300, bool), at)
    km = curves.kaplan_meier(stop, recurred, at)
    assert aj["cumulative_recurrence"].to_numpy() == pytest.approx(
        km["cumulative_recurrence"].to_numpy(), rel=1e-12)


def test_mean_recurrences_per_person_by_hand():
    # person 0: recurrences at 1 and 3, followed to 4; person 1: a recurrence at 2, to 2.5
    start = np.array([0.0, 1.0, 3.0, 0.0, 2.0])
    stop = np.array([1.0, 3.0, 4.0, 2.0, 2.5])
    recurred = np.array([True, True, False, True, False])
    person = np.array([0, 0, 0, 1, 1])
    mcf = curves.mean_recurrences(start, stop, recurred, person, np.array([1.0, 2.0, 3.0]))
    # 1/2 at 1 (two followed), 1/2 at 2 (two followed), 1/1 at 3 (one followed)
    assert mcf["mean_recurrences"].tolist() == pytest.approx([0.5, 1.0, 2.0])
    assert mcf["at_risk"].tolist() == [2, 2, 1]


def test_times_differing_by_floating_point_noise_are_tied():
    a = np.array([0.3, 0.1 + 0.2, 1.0, 2.0])
    (tied,) = cohort.tie_close_times(a)
    assert tied[0] == tied[1] == 0.3 and list(tied[2:]) == [1.0, 2.0]
    start, stop = cohort.tie_close_times(np.array([0.0, 0.1 + 0.2]), np.array([0.3, 0.5]))
    assert start[1] == stop[0]


def test_a_group_without_recurrences_is_flagged_and_not_estimated(tmp_path):
    rng = np.random.default_rng(6)
    n = 300
    frame = pd.DataFrame({"years": rng.exponential(2, n) + 0.01,
                          "group": rng.choice(["a", "b", "c"], n)})
    frame["recurred"] = np.where(frame["group"] == "c", 0.0, (rng.random(n) < 0.6) * 1.0)
    frame.to_csv(tmp_path / "cohort.csv", index=False)
    config = {"name": "flag", "data": {"source": "table", "path": str(tmp_path / "cohort.csv")},
              "models": [{"name": "m", "type": "recurrence", "time": "years",
                          "event": "recurred", "exposure": "group"}]}
    results = cohortstone.run(config, write=False)
    table = results.hazard_ratios
    assert table["flag"].str.startswith("no events: group[c] holds no recurrence").all()
    assert table["hazard_ratio"].isna().all() and table["se"].isna().all()
    assert any("was not estimated" in note for note in results.manifest["notes"])
