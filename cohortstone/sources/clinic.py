"""The demo clinic cohort: an INVENTED follow-up study of kidney-stone formers.

Nothing here describes real people, real clinics or real findings. The "Fernhollow Stone
Clinics" are fiction: about 2,600 people seen for a first stone at 12 made-up clinics between
2008 and 2021, followed to the end of 2024, death or loss to follow-up. Recurrences are
simulated from a known model (`TRUE_LOG_HAZARD_RATIOS`, invented values) with a shared clinic
effect and a personal tendency to recur, so recovery can be checked (the hazard ratios of a
first recurrence are attenuated towards 1 by those tendencies, as marginal hazard ratios
are under a frailty; repeated-event rate ratios are not); the baseline is chosen so
that roughly a third recur within five years, the order of magnitude the literature reports
(`../shared/domain.md` §6), without claiming any real number.

Two shapes of the same people (`data: {source: demo, dataset: ...}`):

* `clinic` — one row per person: the index stone's date, covariates, the first recurrence as
  dates (`first_recurrence_date`, empty when none; `end_date`, the end of follow-up) and as
  years (`years_to_recurrence`, `recurred`), `died` (1 = died before any recurrence) and the
  number of recurrences seen;
* `clinic_intervals` — counting-process rows: one row per person and interval between
  recurrences (`start_years`, `stop_years`, `recurred` at the interval's end, `episode`), with
  `died` = 1 on the last row of people whose follow-up ended by death.

Deterministic: the same seed gives the same tables. Event days are whole days from the index
date, so years = days / 365.25 in both shapes.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import DataSpec

SEED = 20261205
LABEL = ("Fernhollow Stone Clinics cohort (invented demo data; not real people, not "
         "findings)")
DATASETS = ("clinic", "clinic_intervals")
N_CLINICS = 12
STUDY_END = pd.Timestamp("2024-12-31")
FIRST_INDEX, LAST_INDEX = pd.Timestamp("2008-01-01"), pd.Timestamp("2021-12-31")

# The simulation's truth: log hazard ratios of recurrence (invented values).
TRUE_LOG_HAZARD_RATIOS = {
    "fluid_per_litre": -0.30,
    "citrate": -0.35,
    "male": 0.20,
    "age_per_10y": -0.08,
    "diabetes": 0.25,
    "bmi_per_5": 0.10,
    "soft_drink_per_250ml": 0.12,
    "uric acid": 0.30,
    "calcium phosphate": 0.20,
    "struvite": 0.40,
    "cystine": 0.90,
    "mixed": 0.10,
}
BASELINE_SCALE, BASELINE_SHAPE = 0.13, 0.7   # cumulative hazard a·t^b, t in years
CLINIC_SPREAD = 0.15    # variance of the shared clinic effect (gamma, mean 1)
PERSON_SPREAD = 0.5     # variance of a person's tendency to recur again (gamma, mean 1)
STONE_TYPES = ["calcium oxalate", "calcium phosphate", "uric acid", "struvite", "cystine",
               "mixed"]
STONE_SHARES = [0.74, 0.08, 0.09, 0.03, 0.01, 0.05]


def load(spec: DataSpec | None = None, seed: int = SEED) -> pd.DataFrame:
    """The invented cohort in the shape `spec.dataset` asks for."""
    people, intervals = make_cohort(np.random.default_rng(seed))
    dataset = spec.dataset if spec is not None else "clinic"
    return intervals if dataset == "clinic_intervals" else people


def _gamma(rng: np.random.Generator, variance: float, size: int) -> np.ndarray:
    return rng.gamma(1 / variance, variance, size)


def _people(rng: np.random.Generator) -> pd.DataFrame:
    sizes = rng.integers(140, 300, N_CLINICS)
    n = int(sizes.sum())
    clinic = np.repeat(np.arange(1, N_CLINICS + 1), sizes)
    clinic_fluid = np.repeat(rng.normal(0, 0.25, N_CLINICS), sizes)
    span = (LAST_INDEX - FIRST_INDEX).days
    index = FIRST_INDEX + pd.to_timedelta(rng.integers(0, span + 1, n), unit="D")
    age = np.clip(np.round(rng.normal(50, 13, n)), 18, 88)
    male = rng.random(n) < 0.6
    bmi = np.clip(rng.normal(28.5, 5.2, n), 16, 60)
    diabetes = (rng.random(n) < 1 / (1 + np.exp(-(-4.3 + 0.04 * age + 0.08 * (bmi - 28))))
                ).astype(float)
    stone = rng.choice(STONE_TYPES, size=n, p=STONE_SHARES)
    fluid = np.clip(rng.gamma(7.0, 0.29, n) + clinic_fluid, 0.4, 6.0)
    citrate = (rng.random(n) < np.where(np.isin(stone, ["uric acid", "cystine"]), 0.6, 0.25)
               ).astype(float)
    soft = np.where(rng.random(n) < np.where(age < 45, 0.55, 0.35), rng.gamma(1.6, 220, n), 0.0)
    return pd.DataFrame({
        "person_id": np.arange(1, n + 1), "clinic_id": clinic, "index_date": index,
        "age_years": age, "sex": np.where(male, "male", "female"), "bmi": np.round(bmi, 1),
        "diabetes": diabetes, "stone_type": stone, "fluid_l_day": np.round(fluid, 2),
        "citrate": citrate, "soft_drink_ml_day": np.round(soft),
    })


def _risk(people: pd.DataFrame) -> np.ndarray:
    t = TRUE_LOG_HAZARD_RATIOS
    eta = (t["fluid_per_litre"] * (people["fluid_l_day"] - 2) + t["citrate"] * people["citrate"]
           + t["male"] * (people["sex"] == "male") + t["age_per_10y"] * (people["age_years"] - 50)
           / 10 + t["diabetes"] * people["diabetes"] + t["bmi_per_5"] * (people["bmi"] - 28) / 5
           + t["soft_drink_per_250ml"] * people["soft_drink_ml_day"] / 250)
    for kind in STONE_TYPES[1:]:
        eta = eta + t[kind] * (people["stone_type"] == kind)
    return np.exp(eta.to_numpy(dtype=float))


def _recurrence_days(rng: np.random.Generator, multiplier: np.ndarray, end_day: np.ndarray
                     ) -> list[np.ndarray]:
    """Recurrence days of each person before `end_day`: a process with cumulative intensity
    multiplier · a·t^b in years since the index stone (total time), whole days, increasing."""
    a, b = BASELINE_SCALE, BASELINE_SHAPE
    n = len(multiplier)
    days: list[list[int]] = [[] for _ in range(n)]
    cumulative = np.zeros(n)
    last = np.zeros(n, dtype=int)
    active = np.ones(n, bool)
    while active.any():
        cumulative[active] += rng.exponential(1.0, int(active.sum())) / multiplier[active]
        years = (cumulative / a) ** (1 / b)
        day = np.maximum(np.round(years * 365.25).astype(int), last + 1)
        active &= day < end_day
        for i in np.flatnonzero(active):
            days[i].append(int(day[i]))
        last = np.where(active, day, last)
        cumulative = np.where(active, a * (last / 365.25) ** b, cumulative)
    return [np.asarray(d, dtype=int) for d in days]


def make_cohort(rng: np.random.Generator) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(one row per person, counting-process rows) of the invented cohort."""
    people = _people(rng)
    n = len(people)
    clinic_effect = _gamma(rng, CLINIC_SPREAD, N_CLINICS)[people["clinic_id"] - 1]
    tendency = _gamma(rng, PERSON_SPREAD, n)
    death_rate = np.exp(-9.0 + 0.085 * people["age_years"] + 0.4 * people["diabetes"])
    death_day = np.round(rng.exponential(1 / death_rate) * 365.25).astype(int) + 1
    lost_day = np.round(rng.exponential(1 / 0.035, n) * 365.25).astype(int) + 1
    admin_day = (STUDY_END - people["index_date"]).dt.days.to_numpy()
    end_day = np.minimum.reduce([death_day, lost_day, admin_day])
    died_at_end = (death_day <= lost_day) & (death_day <= admin_day)
    recurrences = _recurrence_days(rng, _risk(people) * clinic_effect * tendency, end_day)

    count = np.array([len(r) for r in recurrences])
    first = np.array([r[0] if len(r) else -1 for r in recurrences])
    recurred = count > 0
    day_to_first = np.where(recurred, first, end_day)
    people = people.assign(
        first_recurrence_date=people["index_date"]
        + pd.to_timedelta(np.where(recurred, first, 0), unit="D").where(recurred),
        end_date=people["index_date"] + pd.to_timedelta(end_day, unit="D"),
        years_to_recurrence=day_to_first / 365.25,
        recurred=recurred.astype(float),
        died=(died_at_end & ~recurred).astype(float),
        recurrences=count,
        years_followed=end_day / 365.25,
    )
    people.loc[rng.random(n) < 0.02, "bmi"] = np.nan          # a few not recorded
    people.loc[rng.random(n) < 0.015, "fluid_l_day"] = np.nan
    return people, _intervals(people, recurrences, end_day, died_at_end)


def _intervals(people: pd.DataFrame, recurrences: list[np.ndarray], end_day: np.ndarray,
               died_at_end: np.ndarray) -> pd.DataFrame:
    """Counting-process rows: (previous recurrence, next recurrence or end of follow-up]."""
    rows = []
    for i, days in enumerate(recurrences):
        starts = np.concatenate([[0], days])
        stops = np.concatenate([days, [end_day[i]]])
        events = np.concatenate([np.ones(len(days)), [0.0]])
        if stops[-1] <= starts[-1]:   # follow-up ended on the day of the last recurrence
            starts, stops, events = starts[:-1], stops[:-1], events[:-1]
        died = np.zeros(len(stops))
        died[-1] = float(died_at_end[i] and events[-1] == 0)
        rows.append(pd.DataFrame({"row": i, "episode": np.arange(1, len(stops) + 1),
                                  "start_years": starts / 365.25, "stop_years": stops / 365.25,
                                  "recurred": events, "died": died}))
    long = pd.concat(rows, ignore_index=True)
    covariates = people[["person_id", "clinic_id", "age_years", "sex", "bmi", "diabetes",
                         "stone_type", "fluid_l_day", "citrate", "soft_drink_ml_day"]]
    out = covariates.iloc[long["row"].to_numpy()].reset_index(drop=True)
    return pd.concat([out, long.drop(columns="row")], axis=1)
