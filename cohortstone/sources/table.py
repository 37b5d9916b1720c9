"""The `table` source: one person-level parquet or CSV file, read as it is (never modified)."""
from __future__ import annotations

import pandas as pd

from cohortstone.config.spec import DataSpec
from cohortstone.errors import DataError


def load(spec: DataSpec) -> pd.DataFrame:
    path = spec.path
    if path is None or not path.is_file():
        raise DataError(
            f"data.path: the data file {str(path)!r} does not exist. Paths are read relative to "
            "the config file's folder; give a .parquet or .csv file."
        )
    try:
        if path.suffix.lower() == ".parquet":
            return pd.read_parquet(path)
        return pd.read_csv(path)
    except Exception as exc:  # any reader failure is a data problem for the user
        raise DataError(f"data.path: cannot read {str(path)!r} as "
                        f"{path.suffix.lstrip('.')}: {exc}") from None
