"""Cumulative recurrence over follow-up: 1 − Kaplan–Meier, Aalen–Johansen, mean count.

* Without a competing event the cumulative recurrence is 1 − S(t), S the Kaplan–Meier
  estimate (Kaplan & Meier, JASA 1958) with Greenwood's variance; the interval is the
  log(−log S) interval of S (Kalbfleisch & Prentice, 2002, §4.3) turned round: F ∈
  [1 − S_upper, 1 − S_lower].
* With death as a competing event it is the Aalen–Johansen cumulative incidence
  F(t) = Σ_{τₖ ≤ t} S(τₖ−) d₁ₖ / Yₖ (Aalen & Johansen, Scand J Stat 1978), S the
  Kaplan–Meier estimate of being free of both events. Its variance is the infinitesimal
  jackknife Σᵢ IFᵢ(t)², IFᵢ the derivative of F(t) with respect to row i's weight, written in
  cumulative sums; the interval is F^exp(∓1.96·se / (F log F)) (log(−log F) scale).
* For repeated recurrences, the mean cumulative number of recurrences per person
  μ(t) = Σ_{τₖ ≤ t} dₖ / Yₖ (Nelson–Aalen form; Nelson, Technometrics 1988) with the
  robust variance of Lawless & Nadeau (Technometrics 1995): influence terms summed within
  each person, squared and added, so several recurrences of one person are not taken as
  independent. The interval is μ·exp(±1.96·se/μ). Death, when given, ends follow-up.

`at_risk` is the number of rows followed and event-free just before t (for counting-process
rows: people, since one person's intervals do not overlap). Beyond the last follow-up time
nobody is at risk and the estimate is left empty.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

Z = float(stats.norm.ppf(0.975))
GRID_POINTS = 400  # curves for plots are evaluated at the event times, or this many points


def at_risk(t: np.ndarray, stop: np.ndarray, start: np.ndarray | None = None) -> np.ndarray:
    """Rows with start < t ≤ stop at each t (right-censored rows: stop ≥ t)."""
    t = np.asarray(t, dtype=float)
    ordered = np.sort(stop)
    count = len(ordered) - np.searchsorted(ordered, t, side="left")
    if start is not None:
        begun = np.sort(start)
        count -= len(begun) - np.searchsorted(begun, t, side="left")  # start >= t: not yet
    return count


def _steps(stop: np.ndarray, event: np.ndarray, start: np.ndarray | None = None
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct event times, events and rows at risk at each."""
    times, deaths = np.unique(stop[event], return_counts=True)
    return times, deaths.astype(float), at_risk(times, stop, start).astype(float)


def _interval_loglog(f: np.ndarray, se: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """F^exp(∓z se/(F log F)): the log(−log F) interval of a cumulative incidence."""
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = Z * se / (f * np.log(f))
        lower, upper = f ** np.exp(-scale), f ** np.exp(scale)
    return lower, upper


def _blank_beyond(frame: pd.DataFrame, columns: list[str]) -> pd.DataFrame:
    frame.loc[frame["at_risk"] == 0, columns] = np.nan
    return frame


def kaplan_meier(stop: np.ndarray, recurred: np.ndarray, at: np.ndarray) -> pd.DataFrame:
    """1 − Kaplan–Meier at the times `at`, Greenwood variance, log(−log S) interval."""
    times, d, y = _steps(stop, recurred)
    with np.errstate(divide="ignore", invalid="ignore"):
        surv = np.cumprod(1 - d / y)
        greenwood = np.cumsum(d / (y * (y - d)))  # variance of log S
    k = np.searchsorted(times, at, side="right")  # events at or before each t
    s = np.concatenate([[1.0], surv])[k]
    sigma = np.sqrt(np.concatenate([[0.0], greenwood])[k])
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        shift = Z * sigma / np.log(s)
        s_lower, s_upper = s ** np.exp(-shift), s ** np.exp(shift)
        se = s * sigma  # undefined (NaN) once everyone followed has recurred
    f = 1 - s
    none = k == 0
    lower = np.where(none, 0.0, 1 - s_upper)
    upper = np.where(none, 0.0, 1 - s_lower)
    frame = pd.DataFrame({"years": at, "cumulative_recurrence": f, "se": se,
                          "ci_lower": lower, "ci_upper": upper,
                          "at_risk": at_risk(at, stop)})
    return _blank_beyond(frame, ["cumulative_recurrence", "se", "ci_lower", "ci_upper"])


def aalen_johansen(stop: np.ndarray, recurred: np.ndarray, died: np.ndarray, at: np.ndarray
                   ) -> pd.DataFrame:
    """Cumulative incidence of recurrence with death competing, infinitesimal-jackknife SE."""
    any_event = recurred | died
    times, d, y = _steps(stop, any_event)
    d1 = np.bincount(np.searchsorted(times, stop[recurred]), minlength=len(times)).astype(float)
    hazard, hazard1 = d / y, d1 / y
    surv_before = np.concatenate([[1.0], np.cumprod(1 - hazard)[:-1]])
    c = surv_before * hazard1
    cc = np.cumsum(c)                                   # F at each event time
    with np.errstate(divide="ignore", invalid="ignore"):
        b = np.where(y > d, hazard / (y - d), 0.0)
        jump = np.where(y > d, 1 / (y - d), 0.0)
    cum_a = np.concatenate([[0.0], np.cumsum(surv_before * hazard1 / y)])
    cum_b = np.concatenate([[0.0], np.cumsum(b)])
    cum_bc = np.concatenate([[0.0], np.cumsum(b * cc)])
    exit_bin = np.searchsorted(times, stop, side="right")   # at risk at k < exit_bin
    own = exit_bin - 1                                      # index of an event row's time
    kt = np.searchsorted(times, at, side="right")
    estimate = np.concatenate([[0.0], cc])[kt]
    variance = np.empty(len(at))
    for i, (k, f_t) in enumerate(zip(kt, estimate)):
        m = np.minimum(exit_bin, k)
        ended = exit_bin <= k
        influence = -cum_a[m] + (f_t * cum_b[m] - cum_bc[m])
        mark1 = recurred & ended
        influence[mark1] += (surv_before / y)[own[mark1]]
        mark = any_event & ended
        influence[mark] -= (f_t - cc[own[mark]]) * jump[own[mark]]
        variance[i] = float(influence @ influence)
    se = np.sqrt(variance)
    lower, upper = _interval_loglog(estimate, se)
    none = kt == 0
    frame = pd.DataFrame({"years": at, "cumulative_recurrence": estimate, "se": se,
                          "ci_lower": np.where(none, 0.0, lower),
                          "ci_upper": np.where(none, 0.0, upper),
                          "at_risk": at_risk(at, stop)})
    return _blank_beyond(frame, ["cumulative_recurrence", "se", "ci_lower", "ci_upper"])


def mean_recurrences(start: np.ndarray, stop: np.ndarray, recurred: np.ndarray,
                     person: np.ndarray, at: np.ndarray) -> pd.DataFrame:
    """Mean cumulative number of recurrences per person, Lawless–Nadeau robust SE.

    `person` holds integer codes 0..P−1 of the person each counting-process row belongs to.
    """
    times, d, y = _steps(stop, recurred, start)
    q = d / (y * y)
    cum_q = np.concatenate([[0.0], np.cumsum(q)])
    exit_bin = np.searchsorted(times, stop, side="right")
    entry_bin = np.searchsorted(times, start, side="right")
    own = exit_bin - 1
    kt = np.searchsorted(times, at, side="right")
    estimate = np.concatenate([[0.0], np.cumsum(d / y)])[kt]
    people = int(person.max()) + 1
    variance = np.empty(len(at))
    for i, k in enumerate(kt):
        influence = -(cum_q[np.minimum(exit_bin, k)] - cum_q[np.minimum(entry_bin, k)])
        counted = recurred & (exit_bin <= k)
        influence[counted] += 1 / y[own[counted]]
        per_person = np.bincount(person, weights=influence, minlength=people)
        variance[i] = float(per_person @ per_person)
    se = np.sqrt(variance)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.exp(Z * se / estimate)
    none = kt == 0
    frame = pd.DataFrame({"years": at, "mean_recurrences": estimate, "se": se,
                          "ci_lower": np.where(none, 0.0, estimate / factor),
                          "ci_upper": np.where(none, 0.0, estimate * factor),
                          "at_risk": at_risk(at, stop, start)})
    return _blank_beyond(frame, ["mean_recurrences", "se", "ci_lower", "ci_upper"])


def plot_times(stop: np.ndarray, event: np.ndarray) -> np.ndarray:
    """0, the event times (or an even grid when there are very many) and the last time."""
    times = np.unique(stop[event])
    last = float(np.max(stop))
    if len(times) > GRID_POINTS:
        times = np.linspace(0, last, GRID_POINTS + 1)[1:]
    return np.unique(np.concatenate([[0.0], times, [last]]))
