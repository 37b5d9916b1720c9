"""Source registry: the config's `data.source` -> a loader returning a raw DataFrame."""
from __future__ import annotations

from typing import Callable

import pandas as pd

from cohortstone.config.spec import DataSpec
from cohortstone.errors import DataError
from cohortstone.sources import demo, table

LOADERS: dict[str, Callable[[DataSpec], pd.DataFrame]] = {
    "table": table.load,
    "demo": demo.load,
}


def load(spec: DataSpec) -> pd.DataFrame:
    """Load the data named by the config and apply its `rename`."""
    frame = LOADERS[spec.source](spec)
    return apply_rename(frame, spec)


def input_files(spec: DataSpec) -> list:
    """The files this source reads (hashed into the manifest)."""
    return [spec.path] if spec.path is not None else []


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
