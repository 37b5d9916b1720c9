"""Source registry: the config's `data.source` -> a loader returning a raw DataFrame.

`load_data` is what the pipeline calls: it passes the columns the config uses (the `nhanes`
source reads only the files they need) and returns the source's record of what it read and
did, for the manifest, the methods text and `check`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import pandas as pd

from cohortstone.config.spec import DataSpec, DesignSpec, Study
from cohortstone.errors import DataError
from cohortstone.sources import demo, nhanes, table

LOADERS: dict[str, Callable[[DataSpec], pd.DataFrame]] = {
    "table": table.load,
    "demo": demo.load,
}
# Sources whose files carry the design: the config's `design` block may be left out.
FILE_DESIGNS = {"nhanes": DesignSpec(weight="weight", strata="strata", cluster="psu")}


@dataclass(frozen=True)
class Loaded:
    frame: pd.DataFrame
    record: dict = field(default_factory=dict)   # empty for sources with nothing to report


def load(spec: DataSpec) -> pd.DataFrame:
    """Load the data named by the config and apply its `rename`."""
    frame = LOADERS[spec.source](spec)
    return apply_rename(frame, spec)


def load_data(spec: DataSpec, columns: list[str], write_cache: bool = True) -> Loaded:
    """Load with the config's columns known; `nhanes` also returns its record."""
    if spec.source == "nhanes":
        back = {new: old for old, new in spec.rename}
        frame, record = nhanes.load(spec, [back.get(c, c) for c in columns], write_cache)
        return Loaded(apply_rename(frame, spec), record)
    return Loaded(load(spec))


def used_columns(study: Study) -> list[str]:
    """Every column the config reads, in config order (derived columns included)."""
    columns = [d.source_column for d in study.derive]
    for condition in study.population:
        columns += condition.columns()
    for model in study.models:
        columns += model.columns()
    if study.prevalence is not None:
        p = study.prevalence
        columns += [p.outcome, *p.by] + ([p.trend] if p.trend else [])
        columns += [p.standardize.column] if p.standardize is not None else []
    if study.describe is not None:
        columns += list(study.describe.columns) + ([study.describe.by] if study.describe.by
                                                   else [])
    return list(dict.fromkeys(columns))


def default_design(spec: DataSpec) -> DesignSpec | None:
    """The design a source's own files define, used when the config has no `design`."""
    return FILE_DESIGNS.get(spec.source)


def input_files(spec: DataSpec) -> list:
    """The files this source reads (hashed into the manifest)."""
    return [spec.path] if spec.path is not None else []


def input_hashes(spec: DataSpec, record: dict) -> dict[str, str]:
    """Path -> SHA-256 of every input file (the `nhanes` loader has computed them already)."""
    if spec.source == "nhanes":
        return nhanes.input_hashes(record)
    from cohortstone.checksums import sha256
    return {str(p): sha256(p) for p in input_files(spec)}


def summary_lines(spec: DataSpec, record: dict) -> list[str]:
    """Source-specific lines for `cohortstone check` (files, rows, answers, weight)."""
    return nhanes.summary_lines(record) if spec.source == "nhanes" else []


def apply_rename(frame: pd.DataFrame, spec: DataSpec) -> pd.DataFrame:
    if not spec.rename:
        return frame
    missing = [old for old, _ in spec.rename if old not in frame.columns]
    if missing:
        raise DataError(
            f"data.rename names column(s) {', '.join(map(repr, missing))} that the data do not "
            f"have. The data's columns are: {', '.join(map(str, frame.columns[:40]))}."
        )
    return frame.rename(columns=dict(spec.rename))
