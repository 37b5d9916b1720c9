"""Cohort data for a recurrence model: follow-up in years, events, people, clusters — checked.

Three shapes are accepted (see `config.spec.RecurrenceSpec`):

* durations, one row per person: `time` (years of follow-up from the index stone to the first
  recurrence or the end of follow-up) and `event` (1 recurrence, 0 censored);
* dates, one row per person: `index_date`, `event_date` (empty when there was no recurrence)
  and `end_date`; follow-up in years is (event_date or end_date − index_date) in days divided
  by 365.25, the mean length of a calendar year;
* counting-process rows for repeated recurrences: (`start`, `time`] intervals with `event` at
  the interval's end and the person's `id`; one person's intervals must not overlap.

Only rows in the analysis population are checked; a fault is a `DataError` naming the model
key, the column, how many rows and the first of them. Follow-up times closer than √ε
(1.5e-8, absolute or relative to the mean time) are made equal first: such differences are
floating-point noise from arithmetic on times, and leaving them would split tied times.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import pandas as pd

from cohortstone.config.spec import ModelSpec
from cohortstone.columns import require
from cohortstone.errors import DataError
from cohortstone.exposure import ModelMatrix, build

DAYS_PER_YEAR = 365.25
TIE_TOLERANCE = float(np.sqrt(np.finfo(float).eps))
# exposure.build codes a 0/1 outcome with both values; the Cox model reads its events itself,
# so build is given this alternating internal column and the events are put back afterwards
_CODING_COLUMN = "__cohortstone_coding_placeholder__"


@dataclass(frozen=True)
class Cohort:
    """A recurrence model's rows, every array over all loaded rows (analysed: matrix.in_model)."""

    matrix: ModelMatrix       # coded exposure and covariates; y holds the recurrence events
    stop: np.ndarray          # years from the index stone to the row's end
    event: np.ndarray         # bool: a recurrence at `stop`
    start: np.ndarray | None  # counting-process rows: years at the row's start
    person: np.ndarray | None  # counting-process rows: person codes 0..P−1
    cluster: np.ndarray | None  # codes of the robust variance's clusters (None: model-based)
    died: np.ndarray | None   # bool: death ended follow-up at `stop` (the competing event)
    form: str                 # durations | dates | counting
    cluster_key: str | None   # the column the variance is clustered on


def _fail(spec: ModelSpec, key: str, column: str, bad: np.ndarray, what: str,
          advice: str = "") -> None:
    """A `DataError` when any row is `bad`: the key, the column, the count, the first row."""
    if bad.any():
        first = int(np.argmax(bad)) + 1
        raise DataError(f"models.{spec.name}.{key}: column `{column}` {what} in "
                        f"{int(bad.sum())} row(s) of the population (first at row {first} of "
                        f"the data).{advice}")


def _numbers(frame: pd.DataFrame, spec: ModelSpec, key: str, column: str, rows: np.ndarray,
             what: str) -> np.ndarray:
    series = frame[column]
    if not (pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series)):
        found = ", ".join(map(repr, series[rows].dropna().unique()[:4]))
        raise DataError(f"models.{spec.name}.{key}: column `{column}` must hold {what}; found "
                        f"values such as {found}.")
    values = series.to_numpy(dtype=float)
    _fail(spec, key, column, rows & ~np.isfinite(values), "is missing (or infinite)",
          f" Every analysed row needs {what}; to leave such rows out, add the population "
          f"condition `{column} is not missing`.")
    return values


def _binary(frame: pd.DataFrame, spec: ModelSpec, key: str, column: str, rows: np.ndarray,
            meaning: str) -> np.ndarray:
    values = _numbers(frame, spec, key, column, rows, f"0/1 codes ({meaning})")
    bad = rows & ~np.isin(values, (0.0, 1.0))
    if bad.any():
        found = ", ".join(f"{v:g}" for v in np.unique(values[bad])[:6])
        _fail(spec, key, column, bad, f"must be coded 0/1 ({meaning}) but holds {found}")
    return np.where(rows, values, 0.0) == 1


def _parse_dates(series: pd.Series) -> pd.Series:
    """ISO 8601 text (YYYY-MM-DD, optionally with a time) or date objects; anything else NaT."""
    try:
        return pd.to_datetime(series, errors="coerce", format="ISO8601")
    except ValueError:  # pandas before 2.0 has no "ISO8601" format: its parser reads ISO dates
        return pd.to_datetime(series, errors="coerce")


def _days(frame: pd.DataFrame, spec: ModelSpec, key: str, column: str, rows: np.ndarray
          ) -> np.ndarray:
    """Days since 1970-01-01 (NaN when missing); text must be dates written YYYY-MM-DD."""
    series = frame[column]
    if pd.api.types.is_datetime64_any_dtype(series):
        parsed = series
    else:
        if pd.api.types.is_numeric_dtype(series) and series[rows].notna().any():
            raise DataError(f"models.{spec.name}.{key}: column `{column}` holds numbers; "
                            "expected dates written YYYY-MM-DD (or give durations in years "
                            "with `time` and `event`).")
        parsed = _parse_dates(series)
        unreadable = rows & series.notna().to_numpy() & parsed.isna().to_numpy()
        if unreadable.any():
            shown = ", ".join(map(repr, series[unreadable].unique()[:3]))
            _fail(spec, key, column, unreadable,
                  f"holds text that is not a date written YYYY-MM-DD ({shown})")
    if getattr(parsed.dt, "tz", None) is not None:
        parsed = parsed.dt.tz_localize(None)
    epoch = pd.Timestamp("1970-01-01")
    return ((parsed - epoch) / pd.Timedelta(days=1)).to_numpy(dtype=float, na_value=np.nan)


def _from_dates(frame: pd.DataFrame, spec: ModelSpec, rows: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray]:
    r = spec.recurrence
    index = _days(frame, spec, "index_date", r.index_date, rows)
    event_day = _days(frame, spec, "event_date", r.event_date, rows)
    end = _days(frame, spec, "end_date", r.end_date, rows)
    _fail(spec, "index_date", r.index_date, rows & np.isnan(index), "is missing",
          " Every analysed person needs the date of the index stone.")
    recurred = rows & ~np.isnan(event_day)
    _fail(spec, "event_date", r.event_date, recurred & (event_day < index),
          f"is before the index date `{r.index_date}`")
    _fail(spec, "end_date", r.end_date, rows & ~recurred & np.isnan(end),
          f"is missing where `{r.event_date}` is empty (no recurrence)",
          " Follow-up without a recurrence needs the date it ended.")
    _fail(spec, "end_date", r.end_date, rows & (end < index),
          f"is before the index date `{r.index_date}`")
    _fail(spec, "event_date", r.event_date, recurred & (event_day > end),
          f"is after the end of follow-up `{r.end_date}`")
    last = np.where(recurred, event_day, end)
    return (last - index) / DAYS_PER_YEAR, recurred


def _check_intervals(spec: ModelSpec, start: np.ndarray, stop: np.ndarray, person: np.ndarray,
                     rows: np.ndarray) -> None:
    """One person's (start, stop] intervals must not overlap."""
    r = spec.recurrence
    where = np.flatnonzero(rows)
    order = where[np.lexsort((start[where], person[where]))]
    same = person[order][1:] == person[order][:-1]
    overlap = same & (start[order][1:] < stop[order][:-1])
    if overlap.any():
        bad = np.zeros(len(rows), bool)
        bad[order[1:][overlap]] = True
        _fail(spec, "start", r.start, bad, f"starts before the previous interval of the same "
              f"`{r.id}` has ended (intervals of one person must not overlap)")


def tie_close_times(*arrays: np.ndarray) -> tuple[np.ndarray, ...]:
    """Times closer than √ε (absolute, or relative to the mean |time|) set to the smallest."""
    values = np.concatenate([a[np.isfinite(a)] for a in arrays])
    distinct = np.unique(values)
    if len(distinct) < 2:
        return arrays
    gaps = np.diff(distinct)
    tied = (gaps <= TIE_TOLERANCE) | (gaps / np.mean(np.abs(distinct)) <= TIE_TOLERANCE)
    if not tied.any():
        return arrays
    cuts = distinct[np.concatenate([[True], ~tied])]
    return tuple(np.where(np.isfinite(a), cuts[np.maximum(
        np.searchsorted(cuts, a, side="right") - 1, 0)], a) for a in arrays)


def _codes(frame: pd.DataFrame, spec: ModelSpec, key: str, column: str, rows: np.ndarray
           ) -> np.ndarray:
    series = frame[column]
    _fail(spec, key, column, rows & series.isna().to_numpy(), "is missing",
          " Every analysed row needs a value here.")
    codes = np.full(len(series), -1)
    codes[rows] = pd.factorize(series[rows], sort=True)[0]
    return codes


def prepare(frame: pd.DataFrame, spec: ModelSpec, population: np.ndarray) -> Cohort:
    """Check the follow-up columns in the population, convert dates, code the covariates."""
    r = spec.recurrence
    require(frame, [(f"models.{spec.name}.{key}", column)
                    for key, column in spec.recurrence.named_columns()])
    rows = population.copy()
    start = person = None
    if r.form == "dates":
        stop, event = _from_dates(frame, spec, rows)
    else:
        stop = _numbers(frame, spec, "time", r.time, rows, "follow-up times in years")
        _fail(spec, "time", r.time, rows & (stop < 0), "is negative (follow-up cannot be)")
        event = _binary(frame, spec, "event", r.event, rows, "1 recurrence, 0 none")
    if r.form == "counting":
        start = _numbers(frame, spec, "start", r.start, rows, "interval starts in years")
        _fail(spec, "start", r.start, rows & (start < 0), "is negative (follow-up starts at 0)")
        person = _codes(frame, spec, "id", r.id, rows)
        start, stop = tie_close_times(start, stop)
        _fail(spec, "start", r.start, rows & (start >= stop),
              f"is not before the interval's end `{r.time}` (start must be < time)")
        _check_intervals(spec, start, stop, person, rows)
    else:
        (stop,) = tie_close_times(stop)
    died = None
    if r.competing is not None:
        died = _binary(frame, spec, "competing", r.competing, rows, "1 died, 0 did not")
        _fail(spec, "competing", r.competing, died & event,
              f"is 1 on a row whose `{r.event or r.event_date}` also records a recurrence",
              " Death ends follow-up without a recurrence, so at most one of the two can mark "
              "a row.")
        if person is not None:
            later = np.zeros(len(rows), bool)
            where = np.flatnonzero(rows)
            last = pd.Series(stop[where]).groupby(person[where]).transform("max").to_numpy()
            later[where] = died[where] & (stop[where] < last)
            _fail(spec, "competing", r.competing, later,
                  "is 1 on a row that is not the person's last interval; death ends follow-up")
    cluster = None
    if r.cluster is not None:
        cluster = _codes(frame, spec, "cluster", r.cluster, rows)
    elif person is not None:
        cluster = person
    weight = np.ones(len(frame))
    if person is not None:  # quantile groups of people, not of rows
        weight = 1 / np.bincount(person[rows], minlength=int(person.max()) + 1)[
            np.maximum(person, 0)]
    coding_spec = dataclasses.replace(spec, outcome=_CODING_COLUMN, recurrence=None)
    working = frame.assign(**{_CODING_COLUMN: np.arange(len(frame)) % 2})
    matrix = build(working, coding_spec, rows, weight)
    analysed = matrix.in_model
    if int(analysed.sum()) < 2 or not event[analysed].any():
        raise DataError(f"models.{spec.name}: the {int(analysed.sum())} analysed row(s) hold "
                        "no recurrence, so there is nothing to model; check the `event` codes "
                        "(1 = recurrence) and the population.")
    matrix = dataclasses.replace(matrix, y=np.where(analysed, event, False).astype(float))
    return Cohort(matrix=matrix, stop=stop, event=event & analysed, start=start, person=person,
                  cluster=cluster, died=None if died is None else died & analysed,
                  form=r.form, cluster_key=r.cluster or r.id)
