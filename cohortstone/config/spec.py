"""Frozen specs of a study, and the one-pass validation that builds them from raw YAML.

Every default lives here. Validation collects every problem in the file before failing, and
each message names the key path, its YAML line and what was expected.
"""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from cohortstone.config.conditions import Condition, ConditionSyntaxError, parse_condition
from cohortstone.config.load import RawConfig, dotted
from cohortstone.errors import ConfigError
from cohortstone.standard_population import BUILT_IN, Standard, built_in

NAME_PATTERN = re.compile(r"^[a-z0-9_-]+$")
SOURCES = ("table", "demo", "nhanes")
DEMO_DATASETS = ("survey", "clinic", "clinic_intervals")
MODEL_TYPES = ("logistic", "recurrence")
PLANNED: dict = {}
PROPORTIONAL_HAZARDS_RULES = ("warn", "fail")
RECURRENCE_WITH_DESIGN = (
    "recurrence models are fitted to a cohort without survey weights, strata or clusters, "
    "and this config has a survey `design`. Remove the `design` block (a recurrence model's "
    "own `cluster` key gives a variance clustered on clinic or family), or run survey models "
    "and recurrence models from separate configs.")
SINGLE_CLUSTER_RULES = ("error", "overall_mean")


@dataclass(frozen=True)
class DataSpec:
    source: str
    path: Path | None = None
    dataset: str | None = None
    rename: tuple[tuple[str, str], ...] = ()
    # --- nhanes (the national survey's public files): see cohortstone/sources/nhanes ---
    dir: Path | None = None            # folder of the .XPT files
    cycles: tuple[str, ...] = ()       # e.g. ("2015-2016", "2017-2020")
    foods: Path | None = None          # own food-code map (YAML); None: the shipped one
    cache: Path | None = None          # harmonized-table cache folder; None: no cache


@dataclass(frozen=True)
class DeriveSpec:
    """A column computed right after loading: groups by cut points, or a unit change."""

    name: str
    source_column: str
    cuts: tuple[float, ...] | None = None
    times: float | None = None


@dataclass(frozen=True)
class DesignSpec:
    weight: str | None = None
    strata: str | None = None
    cluster: str | None = None
    single_cluster_strata: str = "error"


@dataclass(frozen=True)
class ModelSpec:
    name: str
    type: str
    outcome: str
    exposure: str
    per: float = 1.0
    cuts: tuple[float, ...] | None = None
    quantiles: int | None = None
    adjust: tuple[str, ...] = ()
    categorical: tuple[str, ...] = ()
    reference: tuple[tuple[str, str], ...] = ()
    recurrence: RecurrenceSpec | None = None   # follow-up of a `type: recurrence` model

    def columns(self) -> list[str]:
        """Every data column the model reads, outcome first."""
        follow_up = [c for _, c in self.recurrence.named_columns()] if self.recurrence else []
        return list(dict.fromkeys([self.outcome, self.exposure, *self.adjust, *follow_up]))


@dataclass(frozen=True)
class RecurrenceSpec:
    """Follow-up of a recurrence model: durations, dates, or counting-process rows.

    durations: `time` (years) and `event` (1 recurrence, 0 censored), one row per person;
    dates: `index_date`, `event_date` (empty: no recurrence) and `end_date`, one row per person;
    counting: `start`, `time`, `event` and `id`, one row per (start, time] interval.
    """

    time: str | None = None
    event: str | None = None
    start: str | None = None
    id: str | None = None
    index_date: str | None = None
    event_date: str | None = None
    end_date: str | None = None
    cluster: str | None = None       # robust variance clustered on this column
    competing: str | None = None     # 0/1: death ended follow-up without a recurrence
    proportional_hazards: str = "warn"   # a failed check: warn (a note) | fail (stop)

    COLUMN_KEYS = ("time", "event", "start", "id", "index_date", "event_date", "end_date",
                   "cluster", "competing")

    @property
    def form(self) -> str:
        if self.index_date is not None:
            return "dates"
        return "counting" if self.start is not None else "durations"

    def named_columns(self) -> list[tuple[str, str]]:
        """(key, column) of every follow-up column the config names."""
        return [(k, getattr(self, k)) for k in self.COLUMN_KEYS if getattr(self, k) is not None]


@dataclass(frozen=True)
class PrevalenceSpec:
    """Design-based prevalence of a 0/1 outcome, overall and by groups."""

    outcome: str
    by: tuple[str, ...] = ()
    standardize: Standard | None = None
    trend: str | None = None   # a column of ordered survey cycles; adds a test for linear trend


@dataclass(frozen=True)
class DescribeSpec:
    """The weighted descriptive table (`table1.csv`) of the analysis population."""

    columns: tuple[str, ...]
    by: str | None = None
    categorical: tuple[str, ...] = ()


@dataclass(frozen=True)
class ReportSpec:
    """How the published files are written."""

    suppress_counts_below: int = 11   # counts of 1 .. this − 1 people are withheld


@dataclass(frozen=True)
class Study:
    """A whole validated config."""

    name: str
    title: str
    output: Path
    data: DataSpec
    derive: tuple[DeriveSpec, ...] = ()
    population: tuple[Condition, ...] = ()
    design: DesignSpec | None = None
    models: tuple[ModelSpec, ...] = ()
    prevalence: PrevalenceSpec | None = None
    describe: DescribeSpec | None = None
    report: ReportSpec = ReportSpec()
    config_file: str | None = None
    raw: Any = field(default=None, compare=False, repr=False)


# ---- the validator -----------------------------------------------------------------------


class _Checker:
    """Walks the raw document, collecting problems instead of stopping at the first."""

    def __init__(self, raw: RawConfig):
        self.raw = raw
        self.problems: list[str] = []

    def fail(self, path: tuple, message: str) -> None:
        line = self.raw.line(path)
        where = f"key `{dotted(path)}`" if path else "the file"
        if line is not None:
            where += f" (line {line})"
        self.problems.append(f"{where}: {message}")

    def mapping(self, path: tuple, value: Any, required: tuple, optional: tuple) -> dict | None:
        if not isinstance(value, dict):
            self.fail(path, f"expected a mapping of keys, found {_kind(value)}.")
            return None
        allowed = required + optional
        for key in value:
            if key in allowed:
                continue
            if ("key", key) in PLANNED:
                self.fail(path + (key,), PLANNED[("key", key)] + ".")
                continue
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
            hint = f" Did you mean `{close[0]}`?" if close else ""
            self.fail(path + (key,), f"unknown key.{hint} Allowed here: {', '.join(allowed)}.")
        for key in required:
            if key not in value:
                self.fail(path, f"the required key `{key}` is missing.")
        return value

    def text(self, path: tuple, value: Any, pattern: re.Pattern | None = None,
             what: str = "text") -> str | None:
        if not isinstance(value, str) or not value.strip():
            self.fail(path, f"expected {what}, found {_kind(value)}.")
            return None
        if pattern is not None and not pattern.match(value):
            self.fail(path, f"expected {what}, found {value!r}.")
            return None
        return value

    def choice(self, path: tuple, value: Any, choices: tuple, kind: str) -> str | None:
        if (kind, value) in PLANNED:
            self.fail(path, PLANNED[(kind, value)] + ".")
            return None
        if value not in choices:
            close = difflib.get_close_matches(str(value), choices, n=1, cutoff=0.5)
            hint = f" Did you mean `{close[0]}`?" if close else ""
            self.fail(path, f"expected one of {', '.join(choices)}, found {value!r}.{hint}")
            return None
        return value

    def number(self, path: tuple, value: Any, positive: bool = False) -> float | None:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(path, f"expected a number, found {_kind(value)}.")
            return None
        if positive and not value > 0:
            self.fail(path, f"expected a number above 0, found {value}.")
            return None
        return float(value)

    def names(self, path: tuple, value: Any) -> tuple[str, ...]:
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list):
            self.fail(path, f"expected a list of column names, found {_kind(value)}.")
            return ()
        out = []
        for i, item in enumerate(value):
            name = self.text(path + (i,), item, what="a column name")
            if name is not None:
                out.append(name)
        return tuple(out)

    def cuts(self, path: tuple, value: Any) -> tuple[float, ...] | None:
        if not isinstance(value, list) or not value:
            self.fail(path, f"expected a list of increasing cut points, found {_kind(value)}.")
            return None
        numbers = [self.number(path + (i,), v) for i, v in enumerate(value)]
        if any(n is None for n in numbers):
            return None
        if any(b <= a for a, b in zip(numbers, numbers[1:])):
            self.fail(path, f"cut points must increase strictly, found {value}.")
            return None
        return tuple(numbers)  # type: ignore[arg-type]


def _kind(value: Any) -> str:
    if value is None:
        return "nothing"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    return f"{type(value).__name__} {value!r}"


def _data(c: _Checker, raw: Any) -> DataSpec | None:
    path = ("data",)
    if not isinstance(raw, dict):
        c.mapping(path, raw, ("source",), ())
        return None
    source = c.choice(path + ("source",), raw.get("source"), SOURCES, "source")
    optional = {"table": ("path", "rename"), "demo": ("dataset", "rename"),
                "nhanes": ("dir", "cycles", "foods", "cache", "rename")}.get(source, ())
    required = {"table": ("source", "path"), "nhanes": ("source", "dir", "cycles")}.get(
        source, ("source",))
    c.mapping(path, raw, required, tuple(k for k in optional if k not in required))
    if source is None:
        return None
    file = None
    if source == "table" and "path" in raw:
        text = c.text(path + ("path",), raw["path"], what="the path of a .parquet or .csv file")
        if text is not None:
            file = Path(text)
            if file.suffix.lower() not in (".parquet", ".csv"):
                c.fail(path + ("path",), f"expected a .parquet or .csv file, found {text!r}.")
            file = file if file.is_absolute() else c.raw.directory / file
    dataset = None
    if source == "demo":
        dataset = c.choice(path + ("dataset",), raw.get("dataset", "survey"), DEMO_DATASETS,
                           "dataset")
    rename: list[tuple[str, str]] = []
    if "rename" in raw:
        if not isinstance(raw["rename"], dict):
            c.fail(path + ("rename",), "expected a mapping `raw_name: schema_name`.")
        else:
            for old, new in raw["rename"].items():
                if c.text(path + ("rename", old), new, NAME_PATTERN, "a snake_case column name"):
                    rename.append((str(old), new))
    if source == "nhanes":
        return _nhanes_data(c, raw, tuple(rename))
    return DataSpec(source=source, path=file, dataset=dataset, rename=tuple(rename))


# --- the nhanes source's keys (begin) ------------------------------------------------------
def _folder(c: _Checker, key: tuple, value: Any, what: str) -> Path | None:
    text = c.text(key, value, what=what)
    if text is None:
        return None
    folder = Path(text)
    return folder if folder.is_absolute() else c.raw.directory / folder


def _nhanes_data(c: _Checker, raw: dict, rename: tuple) -> DataSpec | None:
    """`dir`, `cycles` (known, no duplicates, never 2017-2018 with 2017-2020), `foods`, `cache`."""
    from cohortstone.sources.nhanes.cycles import cycle_problems
    path = ("data",)
    folder = _folder(c, path + ("dir",), raw["dir"], "the folder of the survey's .XPT files") \
        if "dir" in raw else None
    cycles = raw.get("cycles", [])
    cycles = [cycles] if isinstance(cycles, str) else cycles
    if not isinstance(cycles, list) or not cycles:
        c.fail(path + ("cycles",), f"expected a list of survey cycles such as [2015-2016, "
               f"2017-2020], found {_kind(cycles)}.")
        cycles = []
    for index, message in cycle_problems(cycles):
        c.fail(path + ("cycles",) + ((index,) if index is not None else ()), message)
    foods = None
    if "foods" in raw:
        foods = _folder(c, path + ("foods",), raw["foods"], "the path of a food-code map (.yaml)")
        if foods is not None and foods.suffix.lower() not in (".yaml", ".yml"):
            c.fail(path + ("foods",), f"expected a .yaml file, found {raw['foods']!r}.")
    cache = folder / ".cohortstone-cache" if folder is not None else None
    if "cache" in raw:
        if raw["cache"] is False:
            cache = None
        elif raw["cache"] is not True:
            cache = _folder(c, path + ("cache",), raw["cache"], "a folder for the cache, or false")
    if folder is None or not cycles:
        return None
    return DataSpec(source="nhanes", dir=folder, cycles=tuple(str(x) for x in cycles),
                    foods=foods, cache=cache, rename=rename)
# --- the nhanes source's keys (end) --------------------------------------------------------


def _derive(c: _Checker, raw: Any) -> tuple[DeriveSpec, ...]:
    if not isinstance(raw, dict):
        c.fail(("derive",), f"expected a mapping of new column names, found {_kind(raw)}.")
        return ()
    out = []
    for name, rule in raw.items():
        path = ("derive", name)
        c.text(path, name, NAME_PATTERN, "a snake_case column name")
        if not c.mapping(path, rule, ("from",), ("cuts", "times")):
            continue
        source = c.text(path + ("from",), rule.get("from"), what="a column name")
        if ("cuts" in rule) == ("times" in rule):
            c.fail(path, "give exactly one of `cuts` (groups) or `times` (unit change).")
            continue
        cuts = c.cuts(path + ("cuts",), rule["cuts"]) if "cuts" in rule else None
        times = c.number(path + ("times",), rule["times"]) if "times" in rule else None
        if source is not None and (cuts is not None or times is not None):
            out.append(DeriveSpec(name=name, source_column=source, cuts=cuts, times=times))
    return tuple(out)


def _population(c: _Checker, raw: Any) -> tuple[Condition, ...]:
    items = [raw] if isinstance(raw, str) else raw
    if not isinstance(items, list):
        c.fail(("population",), f"expected a list of conditions, found {_kind(raw)}.")
        return ()
    out = []
    for i, text in enumerate(items):
        path = ("population",) if isinstance(raw, str) else ("population", i)
        if not isinstance(text, str):
            c.fail(path, f"expected a condition such as `age_years >= 20`, found {_kind(text)}.")
            continue
        try:
            out.append(parse_condition(text))
        except ConditionSyntaxError as exc:
            c.fail(path, f"cannot read condition `{text}`: {exc}.")
    return tuple(out)


def _design(c: _Checker, raw: Any) -> DesignSpec | None:
    path = ("design",)
    if not c.mapping(path, raw, (), ("weight", "strata", "cluster", "single_cluster_strata")):
        return None
    cols = {k: c.text(path + (k,), raw[k], what="a column name")
            for k in ("weight", "strata", "cluster") if k in raw}
    if not any(cols.values()):
        c.fail(path, "name at least one of `weight`, `strata`, `cluster`.")
    rule = raw.get("single_cluster_strata", "error")
    rule = c.choice(path + ("single_cluster_strata",), rule, SINGLE_CLUSTER_RULES, "rule")
    return DesignSpec(single_cluster_strata=rule or "error", **cols)


_MODEL_KEYS = ("per", "cuts", "quantiles", "adjust", "categorical", "reference")
_RECURRENCE_KEYS = RecurrenceSpec.COLUMN_KEYS + ("proportional_hazards",)
_DATE_KEYS = ("index_date", "event_date", "end_date")


def _follow_up_shape(c: _Checker, path: tuple, raw: dict) -> None:
    """Exactly one of the three shapes: durations, dates, or counting-process rows."""
    durations = [k for k in ("time", "event", "start", "id") if k in raw]
    dates = [k for k in _DATE_KEYS if k in raw]
    if durations and dates:
        c.fail(path, "give follow-up either as durations (`time`, `event`) or as dates "
               f"(`index_date`, `event_date`, `end_date`), not both; found {durations + dates}.")
        return
    if not durations and not dates:
        c.fail(path, "a recurrence model needs its follow-up: `time` and `event` (years, and 1 "
               "for a recurrence, 0 for none), or `index_date`, `event_date` and `end_date`.")
        return
    needed = _DATE_KEYS if dates else ("time", "event")
    shape = ("follow-up given as dates needs `index_date`, `event_date` and `end_date`" if dates
             else "follow-up in years needs `time` and `event`")
    for key in needed:
        if key not in raw:
            c.fail(path, f"the required key `{key}` is missing ({shape}).")
    if durations and ("start" in raw) != ("id" in raw):
        c.fail(path + ("start" if "start" in raw else "id",), "counting-process rows for "
               "repeated recurrences need both `start` (the interval's start) and `id` (the "
               "person it belongs to).")


def _follow_up_columns(c: _Checker, path: tuple, cols: dict, used: set) -> None:
    """Follow-up columns are not the exposure or a covariate, and not named twice."""
    seen: dict[str, str] = {}
    for key, column in cols.items():
        if column is None:
            continue
        if column in used:
            c.fail(path + (key,), f"`{column}` is also the exposure or a covariate.")
        elif column in seen:
            c.fail(path + (key,), f"`{column}` is already named by `{seen[column]}`.")
        seen[column] = key


def _recurrence(c: _Checker, path: tuple, raw: dict, used: set) -> RecurrenceSpec | None:
    """The follow-up keys of a recurrence model: one of the three shapes, nothing mixed."""
    cols = {k: c.text(path + (k,), raw[k], what="a column name")
            for k in RecurrenceSpec.COLUMN_KEYS if k in raw}
    _follow_up_shape(c, path, raw)
    rule = c.choice(path + ("proportional_hazards",), raw.get("proportional_hazards", "warn"),
                    PROPORTIONAL_HAZARDS_RULES, "rule")
    _follow_up_columns(c, path, cols, used)
    if any(v is None for v in cols.values()) or rule is None:
        return None  # the problem is recorded; parse_study raises before this is used
    return RecurrenceSpec(proportional_hazards=rule, **cols)


def _model_keys(c: _Checker, path: tuple, raw: dict, kind: str | None) -> None:
    """Allowed and required keys by model type; follow-up keys only for recurrence models."""
    if kind == "recurrence":
        c.mapping(path, raw, ("name", "exposure"), ("type", "outcome") + _MODEL_KEYS
                  + _RECURRENCE_KEYS)
        if "outcome" in raw:
            c.fail(path + ("outcome",), "recurrence models take `event` (or `event_date`) for "
                   "the recurrence, not `outcome`.")
        return
    c.mapping(path, raw, ("name", "outcome", "exposure"), ("type",) + _MODEL_KEYS
              + _RECURRENCE_KEYS)
    for key in _RECURRENCE_KEYS:
        if key in raw:
            c.fail(path + (key,), "this key belongs to `type: recurrence` models; this "
                   "model is logistic (the default type).")


def _model(c: _Checker, path: tuple, raw: Any) -> ModelSpec | None:
    if not isinstance(raw, dict):
        c.fail(path, f"expected a model mapping, found {_kind(raw)}.")
        return None
    kind = c.choice(path + ("type",), raw.get("type", "logistic"), MODEL_TYPES, "type")
    _model_keys(c, path, raw, kind)
    name = c.text(path + ("name",), raw.get("name"), NAME_PATTERN,
                  "a model name of lower-case letters, digits, - or _") if "name" in raw else None
    outcome = c.text(path + ("outcome",), raw.get("outcome"), what="a column name") \
        if "outcome" in raw and kind != "recurrence" else None
    exposure = c.text(path + ("exposure",), raw.get("exposure"), what="a column name") \
        if "exposure" in raw else None
    codings = [k for k in ("per", "cuts", "quantiles") if k in raw]
    if len(codings) > 1:
        c.fail(path, f"give at most one of `per`, `cuts`, `quantiles`; found {codings}.")
    per = c.number(path + ("per",), raw["per"], positive=True) if "per" in raw else 1.0
    cuts = c.cuts(path + ("cuts",), raw["cuts"]) if "cuts" in raw else None
    quantiles = None
    if "quantiles" in raw:
        q = raw["quantiles"]
        if isinstance(q, bool) or not isinstance(q, int) or not 2 <= q <= 10:
            c.fail(path + ("quantiles",), f"expected a whole number from 2 to 10, found {q!r}.")
        else:
            quantiles = q
    adjust = c.names(path + ("adjust",), raw.get("adjust", []))
    categorical = c.names(path + ("categorical",), raw.get("categorical", []))
    reference: list[tuple[str, str]] = []
    if "reference" in raw:
        if not isinstance(raw["reference"], dict):
            c.fail(path + ("reference",), "expected a mapping `column: level`.")
        else:
            used = {exposure, *adjust}
            for col, level in raw["reference"].items():
                if col not in used:
                    c.fail(path + ("reference", col), "this column is neither the exposure nor in "
                           "`adjust`; a reference level only applies to a model's own columns.")
                reference.append((str(col), str(level)))
    for i, col in enumerate(categorical):
        if col not in (exposure, *adjust):
            c.fail(path + ("categorical", i), f"`{col}` is neither the exposure nor in `adjust`.")
    if exposure is not None and exposure in adjust:
        c.fail(path + ("adjust",), f"the exposure `{exposure}` is also listed in `adjust`.")
    if outcome is not None and outcome in (exposure, *adjust):
        c.fail(path + ("outcome",), "the outcome cannot also be the exposure or a covariate.")
    recurrence = None
    if kind == "recurrence":
        recurrence = _recurrence(c, path, raw, {exposure, *adjust})
        outcome = None if recurrence is None else recurrence.event or recurrence.event_date
    if None in (kind, name, outcome, exposure):
        return None
    return ModelSpec(name=name, type=kind, outcome=outcome, exposure=exposure,  # type: ignore
                     per=per or 1.0, cuts=cuts, quantiles=quantiles, adjust=adjust,
                     categorical=categorical, reference=tuple(reference),
                     recurrence=recurrence)


def _standard(c: _Checker, path: tuple, raw: Any) -> Standard | None:
    if isinstance(raw, str):
        return built_in(raw) if c.choice(path, raw, tuple(BUILT_IN), "standard") else None
    if not c.mapping(path, raw, ("cuts", "weights"), ("column",)):
        return None
    column = c.text(path + ("column",), raw.get("column", "age_years"), what="a column name")
    cuts = c.cuts(path + ("cuts",), raw["cuts"])
    weights = raw["weights"]
    if not isinstance(weights, list) or not weights:
        c.fail(path + ("weights",), f"expected a list of positive numbers, found {_kind(weights)}.")
        return None
    numbers = [c.number(path + ("weights", i), w, positive=True) for i, w in enumerate(weights)]
    if cuts is None or column is None or any(n is None for n in numbers):
        return None
    if len(numbers) != len(cuts):
        c.fail(path + ("weights",), f"expected one weight per age group ({len(cuts)} groups "
               f"from {len(cuts)} cut points, the last open-ended), found {len(numbers)}.")
        return None
    total = sum(numbers)  # type: ignore[arg-type]
    return Standard(name="custom", column=column, cuts=cuts,
                    weights=tuple(n / total for n in numbers))  # type: ignore[operator]


def _prevalence(c: _Checker, raw: Any) -> PrevalenceSpec | None:
    path = ("prevalence",)
    if not c.mapping(path, raw, ("outcome",), ("by", "standardize", "trend")):
        return None
    outcome = c.text(path + ("outcome",), raw.get("outcome"), what="a column name")
    by = c.names(path + ("by",), raw.get("by", []))
    standard = _standard(c, path + ("standardize",), raw["standardize"]) \
        if "standardize" in raw else None
    trend = c.text(path + ("trend",), raw["trend"], what="a column name") \
        if "trend" in raw else None
    if outcome is None:
        return None
    return PrevalenceSpec(outcome=outcome, by=by, standardize=standard, trend=trend)


def _describe(c: _Checker, raw: Any) -> DescribeSpec | None:
    path = ("describe",)
    if not c.mapping(path, raw, ("columns",), ("by", "categorical")):
        return None
    columns = c.names(path + ("columns",), raw.get("columns"))
    by = c.text(path + ("by",), raw["by"], what="a column name") if "by" in raw else None
    categorical = c.names(path + ("categorical",), raw.get("categorical", []))
    if not columns:
        return None
    return DescribeSpec(columns=columns, by=by, categorical=categorical)


def _report(c: _Checker, raw: Any) -> ReportSpec:
    path = ("report",)
    if not c.mapping(path, raw, (), ("suppress_counts_below",)):
        return ReportSpec()
    value = raw.get("suppress_counts_below", 11)
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        c.fail(path + ("suppress_counts_below",), f"expected a whole number of 1 or more (1 "
               f"turns the protection off), found {value!r}.")
        return ReportSpec()
    return ReportSpec(suppress_counts_below=value)


def _recurrence_with_design(c: _Checker, doc: dict, raw_models: list) -> None:
    """A survey design and a recurrence model in one config: refused, saying why."""
    if "design" not in doc:
        return
    for i, item in enumerate(raw_models):
        if isinstance(item, dict) and item.get("type") == "recurrence":
            c.fail(("models", i, "type"), RECURRENCE_WITH_DESIGN)


def parse_study(raw: RawConfig) -> Study:
    """Validate the whole document in one pass; raise one `ConfigError` listing every fault."""
    c = _Checker(raw)
    doc = raw.data
    if not c.mapping((), doc, ("name", "data"), ("title", "output", "derive", "population",
                                                 "design", "models", "prevalence", "describe",
                                                 "report")):
        raise ConfigError(c.problems, file=raw.file)
    name = c.text(("name",), doc.get("name"), NAME_PATTERN,
                  "an output name of lower-case letters, digits, - or _ (it names a folder "
                  "inside the output folder, so `/` and `..` are not allowed)") \
        if "name" in doc else None
    title = doc.get("title", name or "")
    if not isinstance(title, str):
        c.fail(("title",), f"expected text, found {_kind(title)}.")
    output = c.text(("output",), doc.get("output", "reports"), what="a folder path")
    data = _data(c, doc["data"]) if "data" in doc else None
    derive = _derive(c, doc["derive"]) if "derive" in doc else ()
    population = _population(c, doc["population"]) if "population" in doc else ()
    design = _design(c, doc["design"]) if "design" in doc else None
    models: list[ModelSpec] = []
    raw_models = doc.get("models")
    if "models" in doc and (not isinstance(raw_models, list) or not raw_models):
        c.fail(("models",), f"expected a non-empty list of models, found {_kind(raw_models)}.")
    elif isinstance(raw_models, list):
        for i, item in enumerate(raw_models):
            model = _model(c, ("models", i), item)
            if model is not None:
                models.append(model)
        seen: set[str] = set()
        for i, model in enumerate(models):
            if model.name in seen:
                c.fail(("models", i, "name"), f"the model name `{model.name}` is used twice.")
            seen.add(model.name)
        _recurrence_with_design(c, doc, raw_models)
    prevalence = _prevalence(c, doc["prevalence"]) if "prevalence" in doc else None
    describe = _describe(c, doc["describe"]) if "describe" in doc else None
    report = _report(c, doc["report"]) if "report" in doc else ReportSpec()
    if isinstance(doc, dict) and not any(k in doc for k in ("models", "prevalence", "describe")):
        c.fail((), "nothing to estimate: add `models`, `prevalence` or `describe`.")
    if c.problems:
        raise ConfigError(c.problems, file=raw.file)
    return Study(name=name, title=str(title), output=Path(output), data=data,  # type: ignore
                 derive=derive, population=population, design=design, models=tuple(models),
                 prevalence=prevalence, describe=describe, report=report,
                 config_file=raw.file, raw=doc)
