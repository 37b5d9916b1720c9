"""cohortstone's recurrence models checked against R's survival package (Therneau), live.

Each test fits the same data twice: with cohortstone (through `cohortstone.run` on a CSV, or
through its own building blocks) and with tests/reference/coxph/fit.R, which runs R's
`coxph` (Efron ties; `cluster()` robust variance; counting-process `Surv(start, stop, event)`
for repeated events), `cox.zph` and `survfit` (Kaplan–Meier; the multi-state Aalen–Johansen
estimate; the cumulative hazard with `id`, i.e. the mean number of recurrences per person).
Coefficients and (robust) standard errors must agree to a relative 1e-5 and curves to 1e-6
(they agree to about 1e-9 in practice); the proportional-hazards chi-squares to 1e-5.

All data are INVENTED: the package's demo clinic cohort (fiction), cohorts generated below from
a seed, and one published data set (`lifelines.datasets.load_rossi`, the recidivism study of
Rossi et al. 1980 that ships with lifelines), which is real but public and not about stones.
"""
from __future__ import annotations

import secrets
import subprocess
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import cohortstone
from cohortstone.exposure import cut_labels
from cohortstone.models import cox, curves, ph_check
from cohortstone.sources import clinic
from tests.conftest import R_MISSING

FIT_R = Path(__file__).resolve().parents[1] / "reference" / "coxph" / "fit.R"
COEF_RTOL = 1e-5
CURVE_RTOL = 1e-6
YEARS = (1.0, 2.0, 5.0, 10.0)


@pytest.fixture(scope="session")
def rsurvival(rscript) -> str:
    """Rscript, once `library(survival)` loads too; otherwise skip loudly."""
    probe = subprocess.run([rscript, "--vanilla", "-e", "library(survival)"],
                           capture_output=True, text=True, timeout=120)
    if probe.returncode != 0:
        pytest.skip(f"{R_MISSING} (R's `survival` package could not be loaded: "
                    f"{(probe.stderr.strip().splitlines() or ['no message'])[-1]})")
    return rscript


# ---- the R side -----------------------------------------------------------------------------


@dataclass(frozen=True)
class RFit:
    parts: dict
    meta: dict

    def about(self) -> str:
        return f"{self.meta['R_version']}, survival {self.meta['survival_version']}"

    def get(self, section: str) -> pd.Series:
        values = self.parts.get(section, pd.Series(dtype=str))
        return pd.to_numeric(values, errors="coerce")


def fit_in_R(rscript: str, csv: Path, spec: dict, folder: Path) -> RFit:
    """Run fit.R on `csv` with KEY=VALUE arguments from `spec` (lists become repeated keys)."""
    out = folder / "r_fit.csv"
    args = []
    for key, value in spec.items():
        for item in value if isinstance(value, list) else [value]:
            args.append(f"{key}={item}")
    done = subprocess.run([rscript, "--vanilla", str(FIT_R), str(csv), *args, str(out)],
                          capture_output=True, text=True, timeout=300)
    if done.returncode != 0 or not out.is_file():
        pytest.fail(f"the R reference fit failed (exit {done.returncode}) for {spec}:\n"
                    f"{done.stderr}")
    table = pd.read_csv(out, dtype=str, keep_default_na=False)
    parts = {s: g.set_index("name")["value"] for s, g in table.groupby("section")}
    fit = RFit(parts=parts, meta=parts["meta"].to_dict())
    print(f"R reference: {fit.about()}")
    return fit


# ---- the cohortstone side -------------------------------------------------------------------


def r_name(term: str, level: str, codings: dict) -> str:
    """R's coefficient name for cohortstone's term/level (cut groups: `[k]` in natural order)."""
    if not level:
        return term
    coding = codings[term]
    if coding.kind == "cuts":
        return f"{term}[{cut_labels(coding.edges).index(level) + 1}]"
    return f"{term}{level}"


def run_models(csv: Path, models: list[dict]) -> cohortstone.Results:
    config = {"name": "against-r", "data": {"source": "table", "path": str(csv)},
              "models": models}
    return cohortstone.run(config, write=False)


def estimated(results: cohortstone.Results, model: str, outcome: str = "recurrence"
              ) -> pd.DataFrame:
    table = results.hazard_ratios
    rows = table[(table["model"] == model) & (table["outcome"] == outcome)
                 & table["se"].notna()].copy()
    assert (rows["flag"] == "").all(), set(rows["flag"])
    codings = {c.column: c for c in results.manifest["codings"][model]}
    rows["r_name"] = [r_name(t, lv, codings) for t, lv in zip(rows["term"], rows["level"])]
    return rows


def assert_coefficients_match(ours: pd.DataFrame, r: RFit, context: str) -> None:
    """Log hazard ratios and robust SEs equal R's to COEF_RTOL (per-unit scale applied)."""
    where = f"{context}; {r.about()}"
    assert sorted(ours["r_name"]) == sorted(r.get("coef").index), where
    scale = np.where(ours["per"].notna(), ours["per"], 1.0)
    assert_allclose(ours["log_hazard_ratio"].to_numpy(),
                    r.get("coef")[ours["r_name"]].to_numpy() * scale, rtol=COEF_RTOL,
                    err_msg=f"log hazard ratios differ from R's coxph ({where})")
    assert_allclose(ours["se"].to_numpy(), r.get("se")[ours["r_name"]].to_numpy() * scale,
                    rtol=COEF_RTOL, err_msg=f"standard errors differ from R's coxph ({where})")


def assert_ph_matches(ours: pd.DataFrame, model: str, r: RFit, context: str) -> None:
    rows = ours[ours["model"] == model].set_index("term")
    zph = r.get("zph")
    assert sorted(rows.index) == sorted(zph.index), context
    # R survival package, cox.zph(fit) (transform "km", terms = TRUE): chi-square and df
    assert_allclose(rows["chi_square"].to_numpy(), zph[rows.index].to_numpy(), rtol=COEF_RTOL,
                    err_msg=f"PH chi-squares differ from R's cox.zph ({context})")
    assert_allclose(rows["df"].to_numpy(), r.get("zph_df")[rows.index].to_numpy())


def assert_curves_match(ours: pd.DataFrame, value: str, r: RFit, context: str,
                        intervals: bool = True) -> None:
    """Every (group, year) R reports: estimate, SE, interval and numbers at risk."""
    keys = [f"{g}|{y:.17g}" for g, y in zip(ours["group"], ours["years"])]
    ours = ours.assign(key=keys).set_index("key")
    reported = r.get("curve").index
    assert len(reported) > 0 and set(reported) <= set(ours.index), (context, list(reported))
    rows = ours.loc[reported]
    where = f"{context}; {r.about()}"
    assert_allclose(rows[value].to_numpy(), r.get("curve")[reported].to_numpy(),
                    rtol=CURVE_RTOL, atol=1e-12, err_msg=f"curve differs from survfit ({where})")
    assert_allclose(rows["se"].to_numpy(), r.get("curve_se")[reported].to_numpy(),
                    rtol=CURVE_RTOL, atol=1e-12, err_msg=f"SE differs from survfit ({where})")
    assert (rows["at_risk"].to_numpy() == r.get("curve_risk")[reported].to_numpy()).all(), where
    if intervals:
        for ours_col, r_col in (("ci_lower", "curve_lower"), ("ci_upper", "curve_upper")):
            assert_allclose(rows[ours_col].to_numpy(), r.get(r_col)[reported].to_numpy(),
                            rtol=CURVE_RTOL, atol=1e-12,
                            err_msg=f"{ours_col} differs from survfit ({where})")


# ---- the invented clinic cohort as files ----------------------------------------------------

FLUID_MODEL = {"name": "fluid", "type": "recurrence", "time": "years_to_recurrence",
               "event": "recurred", "exposure": "fluid_l_day", "cuts": [1.5, 2.5],
               "adjust": ["age_years", "sex", "bmi", "diabetes"],
               "reference": {"sex": "female"}, "cluster": "clinic_id"}


@pytest.fixture(scope="module")
def people_csv(tmp_path_factory) -> Path:
    """The invented clinic cohort, complete cases only (so curves and fits share rows), with the
    fluid group written out for R's survfit."""
    people = clinic.load().dropna(subset=["fluid_l_day", "bmi"])
    labels = cut_labels((1.5, 2.5))
    people["fluid_group"] = [f"fluid_l_day: {labels[i]}" for i in
                             np.searchsorted([1.5, 2.5], people["fluid_l_day"], side="right")]
    people["citrate_group"] = [f"citrate: {int(c)}" for c in people["citrate"]]
    path = tmp_path_factory.mktemp("clinic") / "clinic_people.csv"
    people.drop(columns=["index_date", "first_recurrence_date", "end_date"]).to_csv(
        path, index=False)
    return path


@pytest.fixture(scope="module")
def intervals_csv(tmp_path_factory) -> Path:
    rows = clinic.load(cohortstone.config.spec.DataSpec(source="demo",
                                                         dataset="clinic_intervals"))
    rows = rows.dropna(subset=["fluid_l_day"])
    labels = cut_labels((1.5, 2.5))
    rows["fluid_group"] = [f"fluid_l_day: {labels[i]}" for i in
                           np.searchsorted([1.5, 2.5], rows["fluid_l_day"], side="right")]
    path = tmp_path_factory.mktemp("clinic") / "clinic_intervals.csv"
    rows.to_csv(path, index=False)
    return path


# ---- first recurrence -----------------------------------------------------------------------


@pytest.mark.r_reference
def test_matches_R_coxph_efron_with_clinic_clustered_variance_and_cox_zph(rsurvival,
                                                                          people_csv, tmp_path):
    results = run_models(people_csv, [FLUID_MODEL])
    ours = estimated(results, "fluid")
    # R survival package: coxph(Surv(years_to_recurrence, recurred) ~ fluid groups + ... +
    # cluster(clinic_id), ties = "efron"); cox.zph(fit) for the PH check
    r = fit_in_R(rsurvival, people_csv, {
        "time": "years_to_recurrence", "event": "recurred",
        "covariates": "fluid_l_day,age_years,sex,bmi,diabetes", "cut": "fluid_l_day:1.5,2.5",
        "factor": "sex:female", "cluster": "clinic_id", "zph": "yes",
        "curves": ",".join(map(str, YEARS)), "group": "fluid_group"}, tmp_path)
    assert_coefficients_match(ours, r, "clinic cohort, fluid groups, clustered on clinic")
    assert_ph_matches(results.proportional_hazards, "fluid", r, "clinic cohort, fluid groups")
    # R survival package: survfit(Surv(time, event) ~ group, conf.type = "log-log"), 1 - S
    assert_curves_match(results.recurrence_curve, "cumulative_recurrence", r,
                        "clinic cohort, 1 - Kaplan-Meier overall and by fluid group")


@pytest.mark.r_reference
def test_matches_R_coxph_cause_specific_and_survfit_aalen_johansen(rsurvival, people_csv,
                                                                   tmp_path):
    model = {"name": "citrate", "type": "recurrence", "time": "years_to_recurrence",
             "event": "recurred", "competing": "died", "exposure": "citrate",
             "categorical": ["citrate"], "adjust": ["age_years", "stone_type"],
             "reference": {"stone_type": "calcium oxalate"}, "cluster": "clinic_id"}
    results = run_models(people_csv, [model])
    common = {"time": "years_to_recurrence", "covariates": "citrate,age_years,stone_type",
              "factor": ["citrate", "stone_type:calcium oxalate"], "cluster": "clinic_id"}
    # R survival package: coxph on recurrences with deaths censored (cause-specific), and
    # survfit on the status censored/recurrence/death (Aalen-Johansen), conf.type "log-log"
    r = fit_in_R(rsurvival, people_csv, {**common, "event": "recurred", "competing": "died",
                                         "curves": ",".join(map(str, YEARS)),
                                         "group": "citrate_group"}, tmp_path)
    assert_coefficients_match(estimated(results, "citrate"), r, "recurrence, death competing")
    assert_curves_match(results.recurrence_curve, "cumulative_recurrence", r,
                        "Aalen-Johansen cumulative incidence overall and by citrate")
    # R survival package: coxph on deaths with recurrences censored (cause-specific death)
    r_death = fit_in_R(rsurvival, people_csv, {**common, "event": "died"}, tmp_path)
    assert_coefficients_match(estimated(results, "citrate", "death"), r_death,
                              "death before recurrence, cause-specific")


# ---- repeated recurrences -------------------------------------------------------------------


@pytest.mark.r_reference
def test_matches_R_coxph_counting_process_clustered_on_the_person_and_survfit_id(
        rsurvival, intervals_csv, tmp_path):
    model = {"name": "every", "type": "recurrence", "start": "start_years",
             "time": "stop_years", "event": "recurred", "id": "person_id",
             "exposure": "fluid_l_day", "cuts": [1.5, 2.5], "adjust": ["age_years", "citrate"]}
    results = run_models(intervals_csv, [model])
    ours = estimated(results, "every")
    assert ours["variance"].str.startswith("robust, clustered on the person").all()
    # R survival package: coxph(Surv(start, stop, recurred) ~ ... + cluster(person_id)),
    # Andersen-Gill with the person-clustered robust variance; cox.zph(fit)
    r = fit_in_R(rsurvival, intervals_csv, {
        "start": "start_years", "time": "stop_years", "event": "recurred",
        "covariates": "fluid_l_day,age_years,citrate", "cut": "fluid_l_day:1.5,2.5",
        "cluster": "person_id", "zph": "yes", "id": "person_id",
        "curves": ",".join(map(str, YEARS)), "group": "fluid_group"}, tmp_path)
    assert_coefficients_match(ours, r, "clinic intervals, Andersen-Gill")
    assert_ph_matches(results.proportional_hazards, "every", r, "clinic intervals")
    # R survival package: survfit(Surv(start, stop, event) ~ group, id = person_id): cumhaz and
    # its robust std.chaz = the mean number of recurrences per person and its SE
    assert_curves_match(results.recurrences_per_person, "mean_recurrences", r,
                        "mean recurrences per person", intervals=False)


# ---- fresh cohorts with many ties -----------------------------------------------------------

FIXED = [(7, "durations"), (2718, "counting"), (31337, "durations"), (404, "counting")]


def synthetic_cohort(seed: int, form: str) -> pd.DataFrame:
    """An INVENTED cohort for tests only: 300-900 people in 8-30 clusters, follow-up rounded to
    0.1 year (many tied times, also between event and censoring), a shared cluster effect;
    for `counting`, every recurrence becomes a row boundary."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(300, 900))
    clusters = int(rng.integers(8, 31))
    cluster = rng.integers(0, clusters, n)
    frailty = rng.gamma(4.0, 0.25, clusters)[cluster]
    x1 = rng.normal(0, 1, n)
    x2 = (rng.random(n) < 0.4).astype(float)
    x3 = rng.gamma(2.0, 1.0, n)
    rate = 0.25 * frailty * np.exp(0.4 * x1 - 0.6 * x2 + 0.15 * x3)
    end = np.round(rng.uniform(0.5, 9.0, n), 1)
    rows = []
    for i in range(n):
        t = 0.0
        while True:
            gap = rng.exponential(1 / rate[i])
            stop = round(t + max(gap, 0.05), 1)
            stop = stop if stop > t else round(t + 0.1, 1)
            if stop >= end[i] or (form == "durations" and t > 0):
                rows.append((i, t, max(end[i], round(t + 0.1, 1)), 0.0))
                break
            rows.append((i, t, stop, 1.0))
            if form == "durations":
                break
            t = stop
    frame = pd.DataFrame(rows, columns=["person", "start", "stop", "event"])
    frame[["x1", "x2", "x3", "cluster"]] = np.column_stack([x1, x2, x3, cluster])[
        frame["person"].to_numpy()]
    return frame


def check_synthetic(rscript: str, seed: int, form: str, folder: Path) -> None:
    replay = f"synthetic cohort seed={seed} ({form}); replay by adding it to FIXED"
    frame = synthetic_cohort(seed, form)
    csv = folder / f"synthetic_{seed}.csv"
    frame.to_csv(csv, index=False)
    frame = pd.read_csv(csv)  # both sides read the same decimal text
    x = frame[["x1", "x2", "x3"]].to_numpy()
    start = frame["start"].to_numpy() if form == "counting" else None
    group = frame["cluster"].astype(int).to_numpy() if form == "durations" else \
        frame["person"].to_numpy()
    # cohortstone's own pieces: the Efron fit with a robust variance, then the PH check
    fit = cox.fit(x, frame["stop"].to_numpy(), frame["event"].to_numpy(), start, group)
    assert fit.converged and not fit.flag, replay
    found = dict((t, c) for t, c, _ in ph_check.statistics(
        x, frame["stop"].to_numpy(), frame["event"].to_numpy(), start, fit.coef,
        {"x1": [0], "x2": [1], "x3": [2]}))
    spec = {"time": "stop", "event": "event", "covariates": "x1,x2,x3", "zph": "yes",
            "cluster": "cluster" if form == "durations" else "person"}
    if form == "counting":
        spec["start"] = "start"
    # R survival package: coxph (Efron, cluster()) and cox.zph on the same file
    r = fit_in_R(rscript, csv, spec, folder)
    where = f"{replay}; {r.about()}"
    names = ["x1", "x2", "x3"]
    assert_allclose(fit.coef, r.get("coef")[names].to_numpy(), rtol=COEF_RTOL, err_msg=where)
    assert_allclose(fit.se, r.get("se")[names].to_numpy(), rtol=COEF_RTOL, err_msg=where)
    assert_allclose(np.sqrt(np.diag(fit.model_cov)), r.get("naive_se")[names].to_numpy(),
                    rtol=COEF_RTOL, err_msg=where)
    assert_allclose([fit.null_loglik, fit.loglik], r.get("loglik")[["null", "final"]],
                    rtol=1e-9, err_msg=where)
    assert_allclose([found[k] for k in [*names, "GLOBAL"]],
                    r.get("zph")[[*names, "GLOBAL"]].to_numpy(), rtol=COEF_RTOL, err_msg=where)


@pytest.mark.r_reference
@pytest.mark.parametrize("seed, form", FIXED, ids=[f"seed{s}-{f}" for s, f in FIXED])
def test_matches_R_coxph_on_random_cohorts_with_tied_times(rsurvival, tmp_path, seed, form):
    check_synthetic(rsurvival, seed, form, tmp_path)


@pytest.mark.r_reference
def test_matches_R_coxph_on_a_random_cohort_drawn_fresh_this_run(rsurvival, tmp_path):
    seed = secrets.randbits(32)
    form = ("durations", "counting")[seed % 2]
    print(f"fresh synthetic cohort: seed={seed} ({form})")
    try:
        check_synthetic(rsurvival, seed, form, tmp_path)
    except (Exception, pytest.fail.Exception) as exc:
        raise AssertionError(f"fresh synthetic cohort seed={seed} ({form}) failed; replay by "
                             f"adding ({seed}, {form!r}) to FIXED: {exc}") from exc


# ---- the published recidivism data, on both sides -------------------------------------------


@pytest.fixture(scope="module")
def rossi_csv(tmp_path_factory) -> Path:
    from lifelines.datasets import load_rossi
    path = tmp_path_factory.mktemp("rossi") / "rossi.csv"
    load_rossi().to_csv(path, index=False)
    return path


ROSSI = ["fin", "age", "race", "wexp", "mar", "paro", "prio"]


@pytest.mark.r_reference
def test_matches_R_coxph_on_the_rossi_recidivism_data(rsurvival, rossi_csv, tmp_path):
    rossi = pd.read_csv(rossi_csv)
    fit = cox.fit(rossi[ROSSI].to_numpy(float), rossi["week"].to_numpy(float),
                  rossi["arrest"].to_numpy())
    # R survival package: coxph(Surv(week, arrest) ~ fin + age + race + wexp + mar + paro +
    # prio), ties = "efron", model-based variance; and survfit's Kaplan-Meier
    r = fit_in_R(rsurvival, rossi_csv, {"time": "week", "event": "arrest",
                                        "covariates": ",".join(ROSSI), "zph": "yes",
                                        "curves": "10,20,30,40,50"}, tmp_path)
    assert_allclose(fit.coef, r.get("coef")[ROSSI].to_numpy(), rtol=COEF_RTOL)
    assert_allclose(fit.se, r.get("se")[ROSSI].to_numpy(), rtol=COEF_RTOL)
    at = np.array([10.0, 20, 30, 40, 50])
    km = curves.kaplan_meier(rossi["week"].to_numpy(float), rossi["arrest"].to_numpy() == 1, at)
    assert_curves_match(km.assign(group="all"), "cumulative_recurrence", r,
                        "rossi, 1 - Kaplan-Meier")


def test_matches_lifelines_coxph_efron_and_its_robust_variance_on_rossi(rossi_csv):
    """A second outside implementation: lifelines' CoxPHFitter (Efron), plain and robust."""
    from lifelines import CoxPHFitter
    rossi = pd.read_csv(rossi_csv).assign(group=lambda d: np.arange(len(d)) % 37)
    x, time, event = rossi[ROSSI].to_numpy(float), rossi["week"].to_numpy(float), \
        rossi["arrest"].to_numpy()
    # the robust variance is compared on untied times: with ties, lifelines' score residuals
    # are not Efron's (its robust SEs then differ from R's coxph by up to ~5%; ours equal R's)
    untied = rossi.assign(week=rossi["week"] + np.arange(len(rossi)) * 1e-4)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = CoxPHFitter().fit(rossi[ROSSI + ["week", "arrest"]], "week", "arrest")
        robust = CoxPHFitter().fit(untied[ROSSI + ["week", "arrest", "group"]], "week",
                                   "arrest", cluster_col="group")
    ours = cox.fit(x, time, event)
    # lifelines CoxPHFitter (Efron ties): coefficients and model-based standard errors
    assert_allclose(ours.coef, plain.params_[ROSSI].to_numpy(), rtol=1e-5)
    assert_allclose(ours.se, plain.standard_errors_[ROSSI].to_numpy(), rtol=1e-5)
    clustered = cox.fit(x, untied["week"].to_numpy(), event, cluster=rossi["group"].to_numpy())
    # lifelines CoxPHFitter(cluster_col=...): robust variance from score residuals
    assert_allclose(clustered.coef, robust.params_[ROSSI].to_numpy(), rtol=1e-5)
    assert_allclose(clustered.se, robust.standard_errors_[ROSSI].to_numpy(), rtol=1e-5)
