"""CSV views of the tidy result frames (deterministic number format)."""
from __future__ import annotations

import pandas as pd


def to_csv(frame: pd.DataFrame, full: bool = False) -> str:
    """Six significant digits (or every digit with `full`), empty cells for missing values,
    Unix newlines."""
    return frame.to_csv(index=False, float_format="%.17g" if full else "%.6g",
                        lineterminator="\n")


def interval_text(value: float, lower: float, upper: float) -> str:
    """`1.23 (1.05–1.44)`; a reference level reads `1 (reference)`."""
    if pd.isna(value):
        return ""
    if pd.isna(lower):
        return "1 (reference)" if value == 1 else f"{value:.2f}"
    return f"{value:.2f} ({lower:.2f}\u2013{upper:.2f})"


def p_text(p: float) -> str:
    if pd.isna(p):
        return ""
    return "<0.001" if p < 0.001 else f"{p:.3f}"
