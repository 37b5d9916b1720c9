"""Known truth: recurrence models recover simulated hazard ratios and their intervals cover.

All data are INVENTED and drawn here from fixed seeds. Coverage bounds allow for Monte Carlo
error: with R replicates a true 95% coverage has SD √(0.95·0.05/R) (1.3 points at R = 300).
"""
from __future__ import annotations

import numpy as np
import pytest

from cohortstone.models import cox, curves


def positive_stable(rng: np.random.Generator, alpha: float, size: int) -> np.ndarray:
    """Z with E[exp(−sZ)] = exp(−s^α) (Kanter's representation; Chambers, Mallows & Stuck,
    JASA 1976). A shared Z keeps hazards proportional marginally, with log hazard ratios
    α·β (Hougaard, *Analysis of Multivariate Survival Data*, 2000, ch. 7)."""
    u = rng.uniform(0, np.pi, size)
    e = rng.exponential(1.0, size)
    return (np.sin(alpha * u) / np.sin(u) ** (1 / alpha)
            * (np.sin((1 - alpha) * u) / e) ** ((1 - alpha) / alpha))


def test_the_positive_stable_draws_have_the_stated_laplace_transform():
    z = positive_stable(np.random.default_rng(5), 0.5, 400_000)
    for s in (0.5, 1.0, 2.0):
        # E exp(−sZ) = exp(−s^α), the defining property (Hougaard 2000)
        assert np.mean(np.exp(-s * z)) == pytest.approx(np.exp(-s ** 0.5), abs=3e-3)


def test_a_large_cohort_recovers_the_true_hazard_ratios_with_tied_times():
    rng = np.random.default_rng(20261205)
    n = 20_000
    beta = np.array([-0.30, 0.50, 0.20])
    x = np.column_stack([rng.normal(2, 0.8, n), rng.random(n) < 0.3, rng.gamma(2, 0.5, n)])
    event_time = rng.exponential(1.0, n) / (0.15 * np.exp(x @ beta))
    censor = rng.uniform(0, 12, n)
    time = np.round(np.minimum(event_time, censor), 2)  # many tied times: Efron matters
    fit = cox.fit(x, np.maximum(time, 0.01), event_time <= censor)
    assert fit.converged and not fit.flag
    assert np.all(np.abs(fit.coef - beta) < 4 * fit.se), (fit.coef, fit.se)
    assert np.all(np.abs(fit.coef - beta) < 0.05)


def test_model_based_intervals_cover_the_truth_for_independent_people():
    rng = np.random.default_rng(11)
    beta = np.array([0.7, -0.5])
    hits = []
    for _ in range(300):
        n = 300
        x = np.column_stack([rng.normal(0, 1, n), rng.random(n) < 0.5])
        event_time = rng.exponential(1.0, n) / (0.3 * np.exp(x @ beta))
        censor = rng.uniform(0, 6, n)
        fit = cox.fit(x, np.round(np.minimum(event_time, censor), 1) + 0.1,
                      event_time <= censor)
        hits.append(np.abs(fit.coef - beta) < 1.96 * fit.se)
    coverage = np.mean(hits, axis=0)
    assert np.all((coverage > 0.91) & (coverage < 0.985)), coverage


def test_robust_intervals_cover_when_clinics_share_a_frailty_and_naive_ones_do_not():
    """60 clinics of 15 people share a positive-stable frailty (α = 0.5); the first covariate
    is a clinic-level one, so people of a clinic are far from independent. The robust
    (clinic-clustered) intervals keep their coverage; model-based ones collapse."""
    rng = np.random.default_rng(29)
    alpha, beta = 0.5, np.array([0.6, -0.4])
    truth = alpha * beta
    robust, naive = [], []
    for _ in range(300):
        clinic = np.repeat(np.arange(60), 15)
        frailty = positive_stable(rng, alpha, 60)[clinic]
        x = np.column_stack([rng.normal(0, 1, 60)[clinic], rng.random(len(clinic)) < 0.5])
        event_time = rng.exponential(1.0, len(clinic)) / (frailty * 0.2 * np.exp(x @ beta))
        censor = rng.uniform(0, 10, len(clinic))
        fit = cox.fit(x, np.minimum(event_time, censor), event_time <= censor, cluster=clinic)
        robust.append(np.abs(fit.coef - truth) < 1.96 * fit.se)
        naive.append(np.abs(fit.coef - truth) < 1.96 * np.sqrt(np.diag(fit.model_cov)))
    robust_cover, naive_cover = np.mean(robust, axis=0), np.mean(naive, axis=0)
    assert robust_cover[0] > 0.89 and 0.90 < robust_cover[1] < 0.985, robust_cover
    assert naive_cover[0] < 0.6, naive_cover  # the clinic-level term: far too narrow


def test_andersen_gill_recovers_rate_ratios_and_person_clustered_intervals_cover():
    """Repeated recurrences: a Poisson process per person with rate 0.4·exp(xβ)·w, w a gamma
    personal tendency (mean 1, variance 0.6). The marginal rate ratio is exp(β); clustering
    on the person keeps the intervals honest."""
    rng = np.random.default_rng(41)
    beta = np.array([-0.4, 0.3])
    robust, naive = [], []
    for _ in range(150):
        n = 250
        x = np.column_stack([rng.random(n) < 0.5, rng.normal(0, 1, n)])
        rate = 0.4 * np.exp(x @ beta) * rng.gamma(1 / 0.6, 0.6, n)
        end = rng.uniform(2, 8, n)
        rows = []
        for i in range(n):
            times = np.cumsum(rng.exponential(1 / rate[i], 30))
            times = times[times < end[i]]
            bounds = np.concatenate([[0.0], times, [end[i]]])
            events = np.concatenate([np.ones(len(times)), [0.0]])
            rows += [(i, a, b, e) for a, b, e in zip(bounds[:-1], bounds[1:], events)]
        person, start, stop, event = map(np.asarray, zip(*rows))
        person = person.astype(int)
        fit = cox.fit(x[person], stop, event, start, cluster=person)
        robust.append(np.abs(fit.coef - beta) < 1.96 * fit.se)
        naive.append(np.abs(fit.coef - beta) < 1.96 * np.sqrt(np.diag(fit.model_cov)))
    robust_cover, naive_cover = np.mean(robust, axis=0), np.mean(naive, axis=0)
    assert np.all(robust_cover > 0.89), robust_cover
    assert np.all(naive_cover < robust_cover - 0.05), (naive_cover, robust_cover)


def test_curves_recover_the_true_cumulative_incidence_with_death_competing():
    """Constant hazards: recurrence 0.15 and death 0.05 a year. The cumulative incidence of
    recurrence is 0.15/0.2·(1 − e^(−0.2t)); without death, 1 − KM estimates 1 − e^(−0.15t)."""
    rng = np.random.default_rng(3)
    n = 40_000
    recurrence, death = rng.exponential(1 / 0.15, n), rng.exponential(1 / 0.05, n)
    censor = rng.uniform(0, 15, n)
    stop = np.minimum.reduce([recurrence, death, censor])
    recurred, died = stop == recurrence, stop == death
    at = np.array([1.0, 2.0, 5.0, 10.0])
    cif = curves.aalen_johansen(stop, recurred, died, at)
    truth = 0.75 * (1 - np.exp(-0.2 * at))
    assert np.all(np.abs(cif["cumulative_recurrence"] - truth) < 4 * cif["se"])
    # with death as mere censoring, 1 − KM answers a different question (no deaths at all)
    km = curves.kaplan_meier(stop, recurred, at)
    assert np.all(np.abs(km["cumulative_recurrence"] - (1 - np.exp(-0.15 * at)))
                  < 4 * km["se"])
    assert np.all(km["cumulative_recurrence"] > cif["cumulative_recurrence"])


def test_curve_intervals_cover_the_true_cumulative_recurrence():
    """400 cohorts of 400 people, as above: the log(−log) intervals of the Aalen–Johansen and
    of 1 − Kaplan–Meier cover the true curve at 2 and 5 years about 95% of the time."""
    rng = np.random.default_rng(17)
    at = np.array([2.0, 5.0])
    cif_truth, km_truth = 0.75 * (1 - np.exp(-0.2 * at)), 1 - np.exp(-0.15 * at)
    cif_hits, km_hits = [], []
    for _ in range(400):
        recurrence, death = rng.exponential(1 / 0.15, 400), rng.exponential(1 / 0.05, 400)
        censor = rng.uniform(0, 12, 400)
        stop = np.minimum.reduce([recurrence, death, censor])
        cif = curves.aalen_johansen(stop, stop == recurrence, stop == death, at)
        cif_hits.append((cif["ci_lower"] < cif_truth) & (cif_truth < cif["ci_upper"]))
        alive = np.minimum(recurrence, censor)  # a cohort without deaths, for 1 − KM
        km = curves.kaplan_meier(alive, alive == recurrence, at)
        km_hits.append((km["ci_lower"] < km_truth) & (km_truth < km["ci_upper"]))
    for hits in (cif_hits, km_hits):
        coverage = np.mean(hits, axis=0)
        assert np.all((coverage > 0.92) & (coverage < 0.98)), coverage
