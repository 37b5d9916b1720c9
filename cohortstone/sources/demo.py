"""The `demo` source: an INVENTED survey of a made-up region, for examples and tests.

Nothing here describes real people or real findings. The "Lakemoor Valley Health Survey" is
fiction: about 8,000 people of all ages in 15 strata with 2-3 clusters each, unequal weights,
and an outcome simulated from a known model (`TRUE_LOG_ODDS`), so recovery can be checked.
Deterministic: the same seed gives the same table.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from cohortstone.config.spec import DataSpec
from cohortstone.sources import clinic

SEED = 20261202
LABEL = "Lakemoor Valley Health Survey (invented demo data; not real people, not findings)"
N_STRATA = 15
PEOPLE_PER_CLUSTER = 230

# The simulation's true adult model (log-odds of ever having had a stone); invented values.
TRUE_LOG_ODDS = {
    "intercept": -2.9,
    "age_per_10y": 0.22,
    "male": 0.45,
    "bmi_per_5": 0.18,
    "diabetes": 0.40,
    "water_l_day": -0.30,
    "soft_drink_per_250ml": 0.15,
    "coffee_per_250ml": -0.08,
}


def load(spec: DataSpec | None = None, seed: int = SEED) -> pd.DataFrame:
    """Return the invented survey table (person level, harmonized schema); the datasets
    `clinic` and `clinic_intervals` are the invented clinic cohort of `sources.clinic`."""
    if spec is not None and spec.dataset in clinic.DATASETS:
        return clinic.load(spec)
    return make_survey(np.random.default_rng(seed))


def label(dataset: str | None) -> str:
    """What the invented demo dataset is, in words for the report."""
    return clinic.LABEL if dataset in clinic.DATASETS else LABEL


def make_survey(rng: np.random.Generator) -> pd.DataFrame:
    clusters_per_stratum = np.where(np.arange(N_STRATA) % 3 == 0, 3, 2)
    strata = np.repeat(np.arange(1, N_STRATA + 1), clusters_per_stratum)
    psu = np.concatenate([np.arange(1, k + 1) for k in clusters_per_stratum])
    sizes = rng.integers(PEOPLE_PER_CLUSTER - 40, PEOPLE_PER_CLUSTER + 40, size=len(strata))
    stratum = np.repeat(strata, sizes)
    cluster = np.repeat(psu, sizes)
    cluster_effect = np.repeat(rng.normal(0, 0.35, len(strata)), sizes)
    cluster_water = np.repeat(rng.normal(0, 0.25, len(strata)), sizes)
    n = len(stratum)

    age = np.minimum(np.round(rng.uniform(0, 1, n) ** 0.9 * 85), 80)  # top-coded at 80
    male = rng.random(n) < 0.49
    race = rng.choice(["white", "black", "hispanic", "other"], size=n, p=[0.6, 0.13, 0.18, 0.09])
    adult = age >= 20
    bmi = np.where(adult, rng.normal(27.5, 5.5, n), rng.normal(19, 3.5, n)).clip(13, 65)
    diabetes = (rng.random(n) < 1 / (1 + np.exp(-(-5.2 + 0.05 * age + 0.08 * (bmi - 27))))
                ).astype(float)

    water = np.exp(rng.normal(-0.2, 0.75, n) + cluster_water) * (rng.random(n) > 0.12)
    water = np.where(adult, water, water * 0.6)
    coffee = np.where(adult & (rng.random(n) < 0.55), rng.gamma(2.0, 180, n), 0.0)
    tea = np.where(rng.random(n) < 0.3, rng.gamma(1.5, 160, n), 0.0)
    soft = np.where(rng.random(n) < np.where(age < 40, 0.5, 0.3), rng.gamma(1.6, 250, n), 0.0)
    diet = np.where(rng.random(n) < 0.18, rng.gamma(1.5, 220, n), 0.0)
    citrus = np.where(rng.random(n) < 0.22, rng.gamma(1.8, 110, n), 0.0)
    milk = np.where(rng.random(n) < np.where(adult, 0.4, 0.8), rng.gamma(1.7, 150, n), 0.0)
    alcohol = np.where(adult & (rng.random(n) < 0.4), rng.gamma(1.2, 300, n), 0.0)
    other = rng.gamma(3.0, 250, n)  # food moisture and unlisted drinks, ml
    total = water + (coffee + tea + soft + diet + citrus + milk + alcohol + other) / 1000

    t = TRUE_LOG_ODDS
    eta = (t["intercept"] + t["age_per_10y"] * (age - 50) / 10 + t["male"] * male
           + t["bmi_per_5"] * (bmi - 27) / 5 + t["diabetes"] * diabetes
           + t["water_l_day"] * water + t["soft_drink_per_250ml"] * soft / 250
           + t["coffee_per_250ml"] * coffee / 250 + cluster_effect)
    stone = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(float)
    stone[~adult] = np.nan  # the stone item is asked of adults only
    stone[adult & (rng.random(n) < 0.004)] = np.nan  # a few refused / don't know

    # Unequal weights: stratum base weight, oversampling of older adults and two groups.
    base = np.repeat(rng.uniform(600, 3200, N_STRATA), clusters_per_stratum)
    oversample = 1 + 1.5 * (age >= 60) + 0.8 * np.isin(race, ["black", "hispanic"])
    weight = np.repeat(base, sizes) / oversample * rng.lognormal(0, 0.25, n)
    bmi_obs = np.where(rng.random(n) < 0.03, np.nan, np.round(bmi, 1))

    return pd.DataFrame({
        "person_id": np.arange(1, n + 1),
        "source": "demo",
        "cycle": "demo-1",
        "age_years": age,
        "sex": np.where(male, "male", "female"),
        "race_ethnicity": race,
        "bmi": bmi_obs,
        "diabetes": diabetes,
        "stone_ever": stone,
        "water_l_day": np.round(water, 3),
        "total_fluid_l_day": np.round(total, 3),
        "coffee_ml_day": np.round(coffee),
        "tea_ml_day": np.round(tea),
        "soft_drink_ml_day": np.round(soft),
        "diet_drink_ml_day": np.round(diet),
        "citrus_juice_ml_day": np.round(citrus),
        "milk_ml_day": np.round(milk),
        "alcohol_ml_day": np.round(alcohol),
        "weight": np.round(weight, 2),
        "strata": stratum,
        "psu": cluster,
    })
