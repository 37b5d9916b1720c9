"""Columns the config names must be in the data: one check, one message shape, a suggestion."""
from __future__ import annotations

import difflib
from typing import Iterable

import pandas as pd

from cohortstone.errors import DataError


def suggest(column: str, frame: pd.DataFrame) -> str:
    """' Did you mean `x`?' for a misspelt column, else a short list of what there is."""
    names = [str(c) for c in frame.columns]
    close = difflib.get_close_matches(column, names, n=1, cutoff=0.6)
    if close:
        return f" Did you mean `{close[0]}`?"
    shown = ", ".join(names[:30]) + (", …" if len(names) > 30 else "")
    return f" The data's columns are: {shown}."


def require(frame: pd.DataFrame, named: Iterable[tuple[str, str]]) -> None:
    """Raise a `DataError` for the first (key path, column) whose column the data lack."""
    for key, column in named:
        if column not in frame.columns:
            raise DataError(f"{key}: column `{column}` is not in the data."
                            f"{suggest(column, frame)}")
