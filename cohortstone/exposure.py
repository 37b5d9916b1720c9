"""Exposure and covariate coding: per-unit scaling, cut points, weighted quantiles, categories.

The result is a numeric model matrix over *all* rows (rows outside the model's domain get
zero weight later, never dropped) plus a frozen `Coding` record of every choice made.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from cohortstone.config.spec import ModelSpec
from cohortstone.columns import require
from cohortstone.errors import DataError

INTERCEPT = "(intercept)"


@dataclass(frozen=True)
class Coding:
    """How one variable entered the model (kept in the manifest and the report)."""

    column: str
    kind: str                      # continuous | cuts | quantiles | categorical
    per: float = 1.0
    edges: tuple[float, ...] = ()  # cut points or quantile boundaries
    levels: tuple[str, ...] = ()   # category labels, reference first
    reference: str | None = None
    medians: tuple[float, ...] = ()  # weighted median of the exposure per category (trend score)


@dataclass(frozen=True)
class Column:
    term: str
    level: str
    role: str  # intercept | exposure | adjustment


@dataclass(frozen=True)
class ModelMatrix:
    x: np.ndarray
    y: np.ndarray
    columns: tuple[Column, ...]
    in_model: np.ndarray           # population & complete for every model column
    exposure_coding: Coding
    codings: tuple[Coding, ...]
    dropped: dict = field(default_factory=dict)   # reason -> rows leaving the domain
    level_index: np.ndarray | None = None         # exposure category per row (-1 outside)

    def names(self) -> list[str]:
        return [c.term if not c.level else f"{c.term}[{c.level}]" for c in self.columns]


def weighted_quantile(values: np.ndarray, weights: np.ndarray, probs) -> np.ndarray:
    """Inverse of the weighted empirical distribution: smallest x with share of weight ≥ p."""
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    share = np.cumsum(w) / w.sum()
    idx = np.searchsorted(share, np.asarray(probs) - 1e-12, side="left")
    return v[np.minimum(idx, len(v) - 1)]


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def cut_labels(edges: tuple[float, ...]) -> list[str]:
    """`<1`, `1-<2`, `>=2` for cut points (1, 2)."""
    labels = [f"<{_fmt(edges[0])}"]
    labels += [f"{_fmt(a)}-<{_fmt(b)}" for a, b in zip(edges, edges[1:])]
    return labels + [f">={_fmt(edges[-1])}"]


def quantile_labels(edges: tuple[float, ...]) -> list[str]:
    """`Q1 (<=a)`, `Q2 (a-b]`, …, `Qk (>c)` with the weighted boundaries written in."""
    k = len(edges) + 1
    labels = [f"Q1 (<={_fmt(edges[0])})"]
    labels += [f"Q{i + 2} ({_fmt(a)}-{_fmt(b)}]" for i, (a, b) in enumerate(zip(edges, edges[1:]))]
    return labels + [f"Q{k} (>{_fmt(edges[-1])})"]


def is_categorical(series: pd.Series, column: str, spec: ModelSpec) -> bool:
    numeric = pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)
    return column in spec.categorical or not numeric


def level_text(value: object) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _categories(series: pd.Series, rows: np.ndarray, column: str, spec: ModelSpec
                ) -> tuple[np.ndarray, tuple[str, ...]]:
    """Category index per row (−1 outside `rows`) with levels ordered reference first."""
    text = series.map(level_text, na_action="ignore")
    if isinstance(series.dtype, pd.CategoricalDtype):
        order = [level_text(c) for c in series.cat.categories]
        present = set(text[rows])
        levels = [lv for lv in order if lv in present]
    else:
        values = series[rows].unique()
        numeric = pd.api.types.is_numeric_dtype(series)
        levels = [level_text(v) for v in sorted(values)] if numeric else sorted(map(str, values))
    reference = dict(spec.reference).get(column)
    if reference is not None:
        if reference not in levels:
            raise DataError(f"models.{spec.name}.reference: `{column}` has no level "
                            f"{reference!r} in the population; its levels are "
                            f"{', '.join(map(repr, levels))}.")
        levels.remove(reference)
        levels.insert(0, reference)
    index = np.full(len(series), -1)
    lookup = {lv: i for i, lv in enumerate(levels)}
    index[rows] = text[rows].map(lookup).to_numpy()
    return index, tuple(levels)


def _numeric(series: pd.Series, column: str, spec: ModelSpec) -> np.ndarray:
    if not pd.api.types.is_numeric_dtype(series):
        raise DataError(f"models.{spec.name}: column `{column}` must hold numbers for "
                        "`per`, `cuts` or `quantiles`.")
    return series.to_numpy(dtype=float)


def _exposure(frame: pd.DataFrame, spec: ModelSpec, rows: np.ndarray, weight: np.ndarray
              ) -> tuple[Coding, np.ndarray | None, np.ndarray | None]:
    """Coding, per-row category index (None for continuous), numeric values (None for text)."""
    column = spec.exposure
    series = frame[column]
    if spec.cuts is None and spec.quantiles is None:
        if is_categorical(series, column, spec):
            index, levels = _categories(series, rows, column, spec)
            return Coding(column, "categorical", levels=levels, reference=levels[0]), index, None
        return Coding(column, "continuous", per=spec.per), None, _numeric(series, column, spec)
    values = _numeric(series, column, spec)
    if spec.cuts is not None:
        edges, kind, labels = spec.cuts, "cuts", cut_labels(spec.cuts)
        index = np.searchsorted(np.asarray(edges), values, side="right")
    else:
        k = spec.quantiles
        edges = tuple(float(e) for e in weighted_quantile(values[rows], weight[rows],
                                                          np.arange(1, k) / k))
        if len(set(edges)) < len(edges):
            raise DataError(f"models.{spec.name}.quantiles: {k} weighted groups of `{column}` "
                            f"share boundaries ({', '.join(map(_fmt, edges))}) because many "
                            "people have the same value; use `cuts` instead.")
        kind, labels = "quantiles", quantile_labels(edges)
        index = np.searchsorted(np.asarray(edges), values, side="left")
    index = np.where(rows, index, -1)
    counts = np.bincount(index[rows], minlength=len(labels))
    if (counts == 0).any():
        empty = [labels[i] for i in np.flatnonzero(counts == 0)]
        raise DataError(f"models.{spec.name}: exposure group(s) {', '.join(empty)} of "
                        f"`{column}` hold nobody in the population; change the cut points.")
    reference = dict(spec.reference).get(column, labels[0])
    if reference not in labels:
        raise DataError(f"models.{spec.name}.reference: `{column}` has no group {reference!r}; "
                        f"its groups are {', '.join(map(repr, labels))}.")
    medians = tuple(float(weighted_quantile(values[index == i], weight[index == i], 0.5))
                    for i in range(len(labels)))
    order = [labels.index(reference)] + [i for i in range(len(labels)) if labels[i] != reference]
    remap = np.argsort(order)
    index = np.where(index >= 0, remap[np.maximum(index, 0)], -1)
    coding = Coding(column, kind, edges=tuple(edges), levels=tuple(labels[i] for i in order),
                    reference=reference, medians=tuple(medians[i] for i in order))
    return coding, index, values


def binary_outcome(frame: pd.DataFrame, column: str, rows: np.ndarray, key: str,
                   need_both: bool = True) -> np.ndarray:
    """The 0/1 outcome as floats (0 outside `rows`); anything else is a `DataError` at `key`."""
    series = frame[column]
    if not pd.api.types.is_numeric_dtype(series):
        found = ", ".join(map(repr, series[rows].unique()[:6]))
        raise DataError(f"{key}: column `{column}` must be coded 0/1 (1 = has the outcome); "
                        f"found text values {found}.")
    y = series.to_numpy(dtype=float)
    found = np.unique(y[rows])
    if not np.isin(found, [0.0, 1.0]).all():
        shown = ", ".join(_fmt(v) for v in found[:8]) + (", …" if len(found) > 8 else "")
        hint = (" These look like survey answer codes (1 yes, 2 no): recode them to 1/0, or "
                "map refusals and don't-knows to missing." if set(found) >= {1.0, 2.0} else "")
        raise DataError(f"{key}: column `{column}` must be coded 0/1 in the population; found "
                        f"the values {shown}.{hint}")
    if need_both and len(found) < 2:
        raise DataError(f"{key}: column `{column}` takes only the value "
                        f"{_fmt(found[0]) if len(found) else 'none'} in the population; "
                        "a logistic model needs both 0 and 1.")
    return np.where(rows, y, 0.0)


def build(frame: pd.DataFrame, spec: ModelSpec, population: np.ndarray, weight: np.ndarray
          ) -> ModelMatrix:
    """Model matrix for `spec` on every row; rows missing a model column leave the domain."""
    require(frame, [(f"models.{spec.name}.{key}", column) for key, column in
                    [("outcome", spec.outcome), ("exposure", spec.exposure),
                     *[("adjust", c) for c in spec.adjust]]])
    rows = population & (weight > 0)
    dropped = {}
    unweighted = int((population & ~(weight > 0)).sum())
    if unweighted:  # e.g. people outside the survey subsample whose weight the analysis uses
        dropped["weight 0"] = unweighted
    for column in spec.columns():
        missing = rows & frame[column].isna().to_numpy()
        if missing.any():
            dropped[f"missing {column}"] = int(missing.sum())
        rows = rows & ~missing
    if not rows.any():
        raise DataError(f"models.{spec.name}: no one in the population has all of "
                        f"{', '.join(spec.columns())} recorded.")
    y = binary_outcome(frame, spec.outcome, rows, f"models.{spec.name}.outcome")
    coding, level_index, _ = _exposure(frame, spec, rows, weight)
    blocks: list[np.ndarray] = [np.ones(len(frame))]
    columns = [Column(INTERCEPT, "", "intercept")]
    codings = [coding]
    if coding.kind == "continuous":
        blocks.append(frame[spec.exposure].to_numpy(dtype=float))
        columns.append(Column(spec.exposure, "", "exposure"))
    else:
        for i, level in enumerate(coding.levels[1:], start=1):
            blocks.append((level_index == i).astype(float))
            columns.append(Column(spec.exposure, level, "exposure"))
    for column in spec.adjust:
        series = frame[column]
        if is_categorical(series, column, spec):
            index, levels = _categories(series, rows, column, spec)
            codings.append(Coding(column, "categorical", levels=levels, reference=levels[0]))
            for i, level in enumerate(levels[1:], start=1):
                blocks.append((index == i).astype(float))
                columns.append(Column(column, level, "adjustment"))
        else:
            blocks.append(series.to_numpy(dtype=float))
            columns.append(Column(column, "", "adjustment"))
            codings.append(Coding(column, "continuous"))
    x = np.column_stack(blocks)
    x[~rows] = 0.0  # NaNs of rows outside the domain must not reach the products
    return ModelMatrix(x=x, y=y, columns=tuple(columns), in_model=rows, exposure_coding=coding,
                       codings=tuple(codings), dropped=dropped, level_index=level_index)


def trend_matrix(matrix: ModelMatrix) -> np.ndarray:
    """Replace the exposure's category indicators by one score: the category's weighted median."""
    coding = matrix.exposure_coding
    keep = [i for i, c in enumerate(matrix.columns) if c.role != "exposure"]
    score = np.asarray(coding.medians)[np.maximum(matrix.level_index, 0)]
    score = np.where(matrix.in_model, score, 0.0)
    x = matrix.x[:, keep]
    return np.column_stack([x[:, :1], score, x[:, 1:]])
