"""The `recurrence` model type: hazard ratios, cumulative recurrence and the PH check.

One model gives tidy frames (nothing is drawn or written here):

* hazard ratios per term level from the Efron Cox fit (`models.cox`): time to the first
  recurrence, or all recurrences of counting-process rows (Andersen–Gill, variance clustered
  on the person); robust variance clustered on `cluster` when given. With `competing`, death
  ends follow-up: the recurrence hazard ratios are cause-specific, and the cause-specific
  hazard ratios of death before a recurrence are added (`outcome = death`);
* cumulative recurrence at 1, 2, 5 and 10 years, overall and by exposure group, and the steps
  of the curves for the figure (`models.curves`): 1 − Kaplan–Meier, or the Aalen–Johansen
  cumulative incidence when death competes; for counting-process rows the mean number of
  recurrences per person instead;
* the proportional-hazards check of every term (`models.ph_check`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from cohortstone.config.spec import ModelSpec
from cohortstone.errors import FitError
from cohortstone.exposure import trend_matrix
from cohortstone.models import cox, curves, ph_check
from cohortstone.models.cohort import Cohort
from cohortstone.models.fit import Fit, critical_value, p_values, wald_test

REPORT_YEARS = (1.0, 2.0, 5.0, 10.0)
FIGURE_YEARS = (0.0, 1.0, 2.0, 5.0, 10.0, 15.0, 20.0)  # the figure's numbers-at-risk row
TIES = "Efron"
HAZARD_COLUMNS = ["model", "term", "level", "outcome", "role", "per", "hazard_ratio",
                  "ci_lower", "ci_upper", "p_value", "n", "events", "p_trend", "p_joint",
                  "analysis", "ties", "variance", "log_hazard_ratio", "se", "flag"]
CURVE_COLUMNS = ["model", "group", "years", "cumulative_recurrence", "ci_lower", "ci_upper",
                 "at_risk", "se", "measure"]
PER_PERSON_COLUMNS = ["model", "group", "years", "mean_recurrences", "ci_lower", "ci_upper",
                      "at_risk", "se"]
KM = "1 - Kaplan-Meier"
AJ = "Aalen-Johansen cumulative incidence (death competing)"


@dataclass(frozen=True)
class RecurrenceResult:
    """The tidy frames of one recurrence model."""

    hazard_ratios: pd.DataFrame
    proportional_hazards: pd.DataFrame
    curve: pd.DataFrame | None = None             # first recurrence, at REPORT_YEARS
    curve_steps: pd.DataFrame | None = None       # the same curves at every step (figure)
    per_person: pd.DataFrame | None = None        # counting-process rows, at REPORT_YEARS
    per_person_steps: pd.DataFrame | None = None
    notes: tuple[str, ...] = ()


def _people(cohort: Cohort, mask: np.ndarray) -> int:
    if cohort.person is None:
        return int(mask.sum())
    return int(len(np.unique(cohort.person[mask])))


def _variance_text(spec: ModelSpec, fit: cox.CoxFit) -> str:
    r = spec.recurrence
    if fit.clusters is None:
        return "model-based"
    if r.cluster is None:
        return f"robust, clustered on the person ({r.id}; {fit.clusters} people)"
    return f"robust, clustered on {r.cluster} ({fit.clusters} clusters)"


def _analysis_text(cohort: Cohort, outcome: str) -> str:
    competing = cohort.died is not None
    if cohort.form == "counting":
        if outcome == "death":
            return "death, counting process (recurrences do not end follow-up)"
        return "every recurrence, Andersen-Gill counting process" + (
            "; death ends follow-up" if competing else "")
    if outcome == "death":
        return "death before a recurrence, cause-specific: a recurrence ends follow-up"
    return "time to first recurrence" + (
        "; cause-specific: death ends follow-up" if competing else "")


def _terms(cohort: Cohort) -> dict[str, list[int]]:
    """Column indices (without the intercept) of each term."""
    out: dict[str, list[int]] = {}
    for j, col in enumerate(cohort.matrix.columns[1:]):
        out.setdefault(col.term, []).append(j)
    return out


def hazard_ratio_rows(spec: ModelSpec, cohort: Cohort, fit: cox.CoxFit, outcome: str,
                      events: np.ndarray, p_trend: float | None, p_joint: float | None
                      ) -> pd.DataFrame:
    """Rows for the exposure (reference level first) and each covariate, like the odds ratios."""
    matrix = cohort.matrix
    analysed = matrix.in_model
    z = critical_value(None)
    p = p_values(fit.coef / fit.se, None)
    codings = {c.column: c for c in matrix.codings}
    rows = []
    for term, indices in _terms(cohort).items():
        coding = codings[term]
        columns = [j + 1 for j in indices]  # in the matrix, after the intercept
        role = matrix.columns[columns[0]].role
        per = coding.per if coding.kind == "continuous" else np.nan
        if coding.kind != "continuous":
            mask = analysed & np.all(matrix.x[:, columns] == 0, axis=1)
            rows.append(dict(term=term, level=coding.levels[0], role=role, per=per,
                             hazard_ratio=1.0, n=_people(cohort, mask),
                             events=int(events[mask].sum()), log_hazard_ratio=0.0))
        for j, col in zip(indices, columns):
            scale = coding.per if coding.kind == "continuous" else 1.0
            b, se = fit.coef[j] * scale, fit.se[j] * scale
            level = matrix.columns[col].level
            mask = analysed & (matrix.x[:, col] == 1 if level else True)
            ratios = dict(hazard_ratio=np.nan, ci_lower=np.nan, ci_upper=np.nan)
            if not fit.flag:
                ratios = dict(hazard_ratio=np.exp(b), ci_lower=np.exp(b - z * se),
                              ci_upper=np.exp(b + z * se))
            rows.append(dict(term=term, level=level, role=role, per=per, **ratios,
                             p_value=p[j], n=_people(cohort, mask),
                             events=int(events[mask].sum()), log_hazard_ratio=b, se=se))
    frame = pd.DataFrame(rows)
    frame.insert(0, "model", spec.name)
    frame["outcome"] = outcome
    exposure = frame["term"] == spec.exposure
    frame["p_trend"] = np.where(exposure, np.nan if p_trend is None else p_trend, np.nan)
    frame["p_joint"] = np.where(exposure, np.nan if p_joint is None else p_joint, np.nan)
    frame["analysis"] = _analysis_text(cohort, outcome)
    frame["ties"] = TIES
    frame["variance"] = _variance_text(spec, fit)
    frame["flag"] = fit.flag
    if fit.flag:
        frame[["hazard_ratio", "ci_lower", "ci_upper", "p_value", "log_hazard_ratio", "se",
               "p_trend", "p_joint"]] = np.nan
    return frame.reindex(columns=HAZARD_COLUMNS)


def _fit(cohort: Cohort, events: np.ndarray, x: np.ndarray | None = None) -> cox.CoxFit:
    rows = cohort.matrix.in_model
    x = cohort.matrix.x[:, 1:] if x is None else x
    return cox.fit(x[rows], cohort.stop[rows], events[rows],
                   None if cohort.start is None else cohort.start[rows],
                   None if cohort.cluster is None else cohort.cluster[rows],
                   cohort.matrix.names()[1:])


def _tests(cohort: Cohort, fit: cox.CoxFit) -> tuple[float | None, float | None]:
    """Joint Wald test of the exposure groups and the test for trend over group medians."""
    coding = cohort.matrix.exposure_coding
    if coding.kind == "continuous" or fit.flag:
        return None, None
    record = Fit(coef=fit.coef, cov=fit.cov, df=None, converged=fit.converged,
                 iterations=fit.iterations, flag=fit.flag)
    columns = [j for j, c in enumerate(cohort.matrix.columns[1:]) if c.role == "exposure"]
    p_joint = wald_test(record, columns)
    if coding.kind not in ("cuts", "quantiles"):
        return None, p_joint
    trend = _fit(cohort, cohort.event, trend_matrix(cohort.matrix)[:, 1:])
    if trend.flag:
        return None, p_joint
    p_trend = wald_test(Fit(coef=trend.coef, cov=trend.cov, df=None, converged=True,
                            iterations=trend.iterations), [0])
    return p_trend, p_joint


def _groups(cohort: Cohort) -> list[tuple[str, np.ndarray]]:
    analysed = cohort.matrix.in_model
    out = [("all", analysed)]
    coding = cohort.matrix.exposure_coding
    if coding.kind != "continuous":
        for i, level in enumerate(coding.levels):
            out.append((f"{coding.column}: {level}", analysed & (cohort.matrix.level_index == i)))
    return out


def _curve(cohort: Cohort, mask: np.ndarray, at: np.ndarray) -> pd.DataFrame:
    stop, event = cohort.stop[mask], cohort.event[mask]
    if cohort.form == "counting":
        person = np.unique(cohort.person[mask], return_inverse=True)[1]
        return curves.mean_recurrences(cohort.start[mask], stop, event, person, at)
    if cohort.died is None:
        return curves.kaplan_meier(stop, event, at).assign(measure=KM)
    return curves.aalen_johansen(stop, event, cohort.died[mask], at).assign(measure=AJ)


def _curves(spec: ModelSpec, cohort: Cohort) -> tuple[pd.DataFrame, pd.DataFrame]:
    table, steps = [], []
    for group, mask in _groups(cohort):
        if not mask.any():
            continue
        at = curves.plot_times(cohort.stop[mask], cohort.event[mask])
        ticks = np.asarray(FIGURE_YEARS)
        at = np.union1d(at, ticks[ticks <= at[-1]])
        for out, times in ((table, np.asarray(REPORT_YEARS)), (steps, at)):
            frame = _curve(cohort, mask, times)
            frame.insert(0, "group", group)
            frame.insert(0, "model", spec.name)
            out.append(frame)
    columns = PER_PERSON_COLUMNS if cohort.form == "counting" else CURVE_COLUMNS
    return (pd.concat(table, ignore_index=True).reindex(columns=columns),
            pd.concat(steps, ignore_index=True).reindex(columns=columns))


def _ph_table(spec: ModelSpec, cohort: Cohort, fit: cox.CoxFit) -> tuple[pd.DataFrame, list[str]]:
    if fit.flag:
        return ph_check.table(spec.name, "recurrence", []), []
    rows = cohort.matrix.in_model
    found = ph_check.statistics(cohort.matrix.x[rows][:, 1:], cohort.stop[rows],
                                cohort.event[rows],
                                None if cohort.start is None else cohort.start[rows],
                                fit.coef, _terms(cohort))
    table = ph_check.table(spec.name, "recurrence", found)
    failed = table.loc[table["p_value"] < ph_check.LEVEL, "term"].tolist()
    return table, failed


def estimate(spec: ModelSpec, cohort: Cohort) -> RecurrenceResult:
    """Fit the model, its curves and its proportional-hazards check."""
    notes: list[str] = []
    fit = _fit(cohort, cohort.event)
    p_trend, p_joint = _tests(cohort, fit)
    tables = [hazard_ratio_rows(spec, cohort, fit, "recurrence", cohort.event, p_trend,
                                p_joint)]
    if fit.flag:
        notes.append(f"model `{spec.name}` was not estimated: {fit.flag}.")
    if cohort.died is not None:
        if cohort.died.any():
            death = _fit(cohort, cohort.died)
            tables.append(hazard_ratio_rows(spec, cohort, death, "death", cohort.died, None,
                                            None))
        else:
            notes.append(f"model `{spec.name}`: nobody analysed died, so death does not "
                         "compete and no death hazard ratios are given.")
    ph, failed = _ph_table(spec, cohort, fit)
    if failed:
        text = (f"model `{spec.name}`: the proportional-hazards check found p < 0.05 for "
                f"{', '.join(failed)}; those hazard ratios are averages over follow-up and may "
                "change with time.")
        if spec.recurrence.proportional_hazards == "fail":
            raise FitError(f"models.{spec.name}.proportional_hazards: {text} The config asks "
                           "to stop in that case (`proportional_hazards: fail`); set it to "
                           "`warn` to report the hazard ratios with this note, or model the "
                           "term differently (e.g. in groups, or in a separate model for early "
                           "and late follow-up).")
        notes.append(text)
    table, steps = _curves(spec, cohort)
    common = dict(hazard_ratios=pd.concat(tables, ignore_index=True), proportional_hazards=ph,
                  notes=tuple(notes))
    if cohort.form == "counting":
        return RecurrenceResult(per_person=table, per_person_steps=steps, **common)
    return RecurrenceResult(curve=table, curve_steps=steps, **common)


def stack(results: list[RecurrenceResult]) -> RecurrenceResult:
    """The frames of several recurrence models, one below the other (None where none has it)."""
    def joined(name: str) -> pd.DataFrame | None:
        frames = [getattr(r, name) for r in results if getattr(r, name) is not None]
        return pd.concat(frames, ignore_index=True) if frames else None
    return RecurrenceResult(
        hazard_ratios=joined("hazard_ratios"),  # type: ignore[arg-type]
        proportional_hazards=joined("proportional_hazards"),  # type: ignore[arg-type]
        curve=joined("curve"), curve_steps=joined("curve_steps"),
        per_person=joined("per_person"), per_person_steps=joined("per_person_steps"),
        notes=tuple(n for r in results for n in r.notes))
