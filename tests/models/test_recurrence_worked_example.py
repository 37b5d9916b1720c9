"""A published worked example: the recidivism study (Rossi, Berk & Lenihan 1980) that ships
with lifelines as `load_rossi`, fitted with Cox regression by Fox & Weisberg in their appendix
on Cox proportional-hazards regression to *An R Companion to Applied Regression*.

432 released prisoners followed for a year; `week` of first arrest, `arrest` 1/0; financial
aid (`fin`), age, race, work experience, marital status, parole, prior convictions. The
appendix fits Surv(week, arrest) ~ fin + age + race + wexp + mar + paro + prio with Efron ties.
The published numbers are written in below `# from memory`: the appendix could not be opened
where these tests were written. They are in any case cross-checked against R's coxph on the
same data in test_recurrence_against_R.py, where our fit agrees to 1e-9.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lifelines.datasets import load_rossi

import cohortstone
from cohortstone.models import cox

# from memory: Fox & Weisberg, appendix "Cox Proportional-Hazards Regression for Survival Data
# in R", the printed coxph fit (coef, se(coef)); factors coded fin yes, race other (reference
# black), wexp yes, mar not married (reference married), paro yes
PUBLISHED = {
    "finyes": (-0.37942, 0.19138),
    "age": (-0.05744, 0.02200),
    "raceother": (-0.31390, 0.30799),
    "wexpyes": (-0.14980, 0.21222),
    "marnot married": (0.43370, 0.38187),
    "paroyes": (-0.08487, 0.19576),
    "prio": (0.09150, 0.02865),
}
PUBLISHED_LIKELIHOOD_RATIO = 33.27   # from memory: "Likelihood ratio test=33.3 on 7 df"


@pytest.fixture(scope="module")
def rossi() -> pd.DataFrame:
    return load_rossi()


def test_the_plain_fit_reproduces_the_published_coefficients_and_errors(rossi):
    # lifelines codes race 1 = black and mar 1 = married, the appendix's reference levels, so
    # those two columns enter with the opposite sign of the appendix's factors
    sign = {"race": -1.0, "mar": -1.0}
    columns = ["fin", "age", "race", "wexp", "mar", "paro", "prio"]
    x = rossi[columns].to_numpy(float) * np.array([sign.get(c, 1.0) for c in columns])
    fit = cox.fit(x, rossi["week"].to_numpy(float), rossi["arrest"].to_numpy())
    coef, se = zip(*PUBLISHED.values())
    # Fox & Weisberg, appendix on Cox regression: coefficients and SEs printed to 5 decimals
    assert fit.coef == pytest.approx(coef, abs=6e-6)
    assert fit.se == pytest.approx(se, abs=6e-6)
    # ... and the likelihood-ratio chi-square of the 7 terms, printed to 2 decimals
    assert 2 * (fit.loglik - fit.null_loglik) == pytest.approx(PUBLISHED_LIKELIHOOD_RATIO,
                                                               abs=0.006)


def test_the_pipeline_codes_the_factors_as_the_appendix_does(rossi, tmp_path):
    """Through `cohortstone.run`: text categories with chosen reference levels, financial aid
    as the exposure; every hazard ratio is exp(published coefficient)."""
    table = pd.DataFrame({
        "week": rossi["week"], "arrest": rossi["arrest"],
        "fin": np.where(rossi["fin"] == 1, "yes", "no"), "age": rossi["age"],
        "race": np.where(rossi["race"] == 1, "black", "other"),
        "wexp": np.where(rossi["wexp"] == 1, "yes", "no"),
        "mar": np.where(rossi["mar"] == 1, "married", "not married"),
        "paro": np.where(rossi["paro"] == 1, "yes", "no"), "prio": rossi["prio"]})
    table.to_csv(tmp_path / "rossi.csv", index=False)
    config = {"name": "rossi", "data": {"source": "table", "path": str(tmp_path / "rossi.csv")},
              "models": [{"name": "arrest", "type": "recurrence", "time": "week",
                          "event": "arrest", "exposure": "fin",
                          "adjust": ["age", "race", "wexp", "mar", "paro", "prio"],
                          "reference": {"race": "black", "mar": "married"}}]}
    rows = cohortstone.run(config, write=False).hazard_ratios
    estimated = rows[rows["se"].notna()]
    names = [t + lv for t, lv in zip(estimated["term"], estimated["level"].fillna(""))]
    assert sorted(names) == sorted(PUBLISHED)
    # Fox & Weisberg, appendix on Cox regression (see above)
    published = np.array([PUBLISHED[n][0] for n in names])
    assert estimated["log_hazard_ratio"].to_numpy() == pytest.approx(published, abs=6e-6)
    assert estimated["hazard_ratio"].to_numpy() == pytest.approx(np.exp(published), rel=1e-5)
    assert set(estimated["variance"]) == {"model-based"} and set(estimated["ties"]) == {"Efron"}
    reference = rows[rows["term"] == "fin"].iloc[0]
    assert (reference["level"], reference["hazard_ratio"], reference["n"],
            reference["events"]) == ("no", 1.0, 216, 66)
