"""Prevalence chart: estimates by group with Korn–Graubard intervals; unreliable ones marked.

Suppressed estimates get no point, only the word; estimates flagged for review are drawn
hollow. Survey cycles (the trend column) are drawn as a line with an interval band.
"""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from cohortstone.reliability import REVIEW, SUPPRESS
from cohortstone.report.figures import GREY, INK, STYLE, export


def _label(row: pd.Series) -> str:
    return "Everyone" if row["by"] == "all" else f"{row['by']}: {row['group']}"


def draw_groups(table: pd.DataFrame, ax: Axes) -> Axes:
    """Dot plot of crude (filled circle) and age-standardized (square) prevalence, in %."""
    rows = table.reset_index(drop=True)
    y = np.arange(len(rows))[::-1].astype(float)
    adjusted = "adjusted_prevalence" in rows.columns
    for yi, (_, r) in zip(y, rows.iterrows()):
        _point(ax, yi + (0.15 if adjusted else 0), r, "", "o")
        if adjusted:
            _point(ax, yi - 0.15, r, "adjusted_", "s")
    ax.set_yticks(y, [_label(r) for _, r in rows.iterrows()])
    ax.set_ylim(-0.8, len(rows) - 0.2)
    ax.set_xlabel("Prevalence, % (95% Korn\u2013Graubard interval)")
    ax.set_xlim(left=0)
    ax.spines[["top", "right"]].set_visible(False)
    if adjusted:
        ax.plot([], [], "o", color=INK, label="crude")
        ax.plot([], [], "s", color=GREY, label="age-standardized")
        ax.legend(loc="lower right", frameon=False, fontsize=8)
    return ax


def _point(ax: Axes, y: float, r: pd.Series, prefix: str, marker: str) -> None:
    p = r.get(f"{prefix}prevalence")
    word = r.get(f"{prefix}reliability", "")
    colour = INK if not prefix else GREY
    if word == SUPPRESS:
        ax.annotate("suppressed", xy=(0.01, y), xycoords=("axes fraction", "data"),
                    va="center", fontsize=7.5, color=colour, style="italic")
        return
    if p is None or pd.isna(p):
        return
    lo, hi = 100 * r[f"{prefix}ci_lower"], 100 * r[f"{prefix}ci_upper"]
    ax.hlines(y, lo, hi, color=colour, linewidth=1.3)
    face = "white" if word == REVIEW else colour
    ax.plot(100 * p, y, marker, markerfacecolor=face, markeredgecolor=colour, markersize=5)
    if word == REVIEW:
        ax.annotate("review", xy=(hi, y), xytext=(4, 0), textcoords="offset points",
                    va="center", fontsize=7.5, color=colour, style="italic")


def draw_cycles(table: pd.DataFrame, ax: Axes) -> Axes:
    """Prevalence by survey cycle as a line with its interval band; unreliable points marked."""
    x = np.arange(len(table))
    p = 100 * table["prevalence"].to_numpy(dtype=float)
    ok = ~table["reliability"].eq(SUPPRESS).to_numpy()
    ax.fill_between(x[ok], 100 * table["ci_lower"].to_numpy(dtype=float)[ok],
                    100 * table["ci_upper"].to_numpy(dtype=float)[ok], color="#d9d9d9")
    ax.plot(x[ok], p[ok], "-o", color=INK, markersize=4)
    review = table["reliability"].eq(REVIEW).to_numpy()
    ax.plot(x[review], p[review], "o", markerfacecolor="white", markeredgecolor=INK)
    for xi in x[~ok]:
        ax.annotate("suppressed", xy=(xi, 0.02), xycoords=("data", "axes fraction"),
                    ha="center", fontsize=7.5, style="italic")
    ax.set_xticks(x, table["group"].tolist())
    ax.set_ylim(bottom=0)
    ax.set_ylabel("Prevalence, %")
    ax.set_xlabel(str(table["by"].iloc[0]))
    ax.spines[["top", "right"]].set_visible(False)
    return ax


def figure(table: pd.DataFrame, trend: str | None = None) -> Figure:
    cycles = table[table["by"] == trend] if trend else table.iloc[0:0]
    groups = table[table["by"] != trend] if trend else table
    n = len(groups)
    with plt.rc_context(STYLE):
        if len(cycles):
            fig, (ax, ax2) = plt.subplots(1, 2, figsize=(10, 1.2 + 0.3 * n),
                                          gridspec_kw={"width_ratios": [3, 2]})
            draw_cycles(cycles.reset_index(drop=True), ax2)
        else:
            fig, ax = plt.subplots(figsize=(7, 1.2 + 0.3 * n))
        draw_groups(groups, ax)
        fig.tight_layout()
    return fig


def render(table: pd.DataFrame, trend: str | None = None) -> tuple[bytes, str]:
    """PNG bytes and SVG text of the prevalence chart (reproducible files)."""
    return export(figure(table, trend))
