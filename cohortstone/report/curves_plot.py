"""Figures of the recurrence models: cumulative recurrence curves with a numbers-at-risk row,
and the forest plot of odds and hazard ratios together.

Curves are drawn from the tidy step frames of `models.recurrence` (one panel per model,
overall in black, each exposure group in its own colour, 95% intervals as light bands);
below each panel, the number of people still followed and free of recurrence at 0, 1, 2, 5
and 10 years, small counts withheld as in the tables.
"""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from cohortstone.models.recurrence import FIGURE_YEARS
from cohortstone.report import forest
from cohortstone.report.figures import INK, STYLE, export
from cohortstone.report.views import count_text

COLOURS = ["#0072b2", "#d55e00", "#009e73", "#cc79a7", "#e69f00", "#56b4e9", "#7a7a7a"]
TICKS = FIGURE_YEARS
MEASURES = {"cumulative_recurrence": "Cumulative recurrence, %",
            "mean_recurrences": "Mean recurrences per person"}


def _value(steps: pd.DataFrame) -> str:
    return "mean_recurrences" if "mean_recurrences" in steps.columns else "cumulative_recurrence"


def _groups(steps: pd.DataFrame) -> list[tuple[str, pd.DataFrame, str]]:
    out = []
    for i, (group, rows) in enumerate(steps.groupby("group", sort=False)):
        colour = INK if group == "all" else COLOURS[(i - 1) % len(COLOURS)]
        out.append((str(group), rows.sort_values("years"), colour))
    return out


def draw(steps: pd.DataFrame, ax: Axes) -> Axes:
    """One model's curves on `ax`: a step line per group and its interval as a band."""
    value = _value(steps)
    scale = 100.0 if value == "cumulative_recurrence" else 1.0
    for group, rows, colour in _groups(steps):
        shown = rows[rows[value].notna()]
        years = shown["years"].to_numpy(dtype=float)
        ax.step(years, scale * shown[value].to_numpy(dtype=float), where="post", color=colour,
                linewidth=1.8 if group == "all" else 1.3, label=group)
        ax.fill_between(years, scale * shown["ci_lower"].to_numpy(dtype=float),
                        scale * shown["ci_upper"].to_numpy(dtype=float), step="post",
                        color=colour, alpha=0.12, linewidth=0)
    last = float(steps["years"].max())
    ax.set_xlim(0, last)
    ax.set_ylim(bottom=0)
    ax.set_xticks([t for t in TICKS if t <= last])
    ax.set_ylabel(MEASURES[value])
    ax.set_title(str(steps["model"].iloc[0]), loc="left", fontsize=9)
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(loc="upper left", frameon=False, fontsize=7.5)
    return ax


def draw_at_risk(steps: pd.DataFrame, ax: Axes, threshold: int) -> Axes:
    """The numbers-at-risk row under a panel: one line per group, one column per tick."""
    last = float(steps["years"].max())
    ticks = [t for t in TICKS if t <= last]
    groups = _groups(steps)
    for row, (group, rows, colour) in enumerate(groups):
        at = rows.set_index("years")["at_risk"]
        for t in ticks:
            shown = count_text(at.get(t, np.nan), threshold)
            ax.text(t, -row, shown, ha="center", va="center", fontsize=7, color=colour)
    ax.set_xlim(0, last)
    ax.set_ylim(-len(groups) + 0.5, 0.5)
    ax.set_yticks(-np.arange(len(groups)), [g for g, _, _ in groups], fontsize=7)
    ax.set_xticks([])
    ax.set_xlabel("Years since the index stone (numbers at risk above)")
    ax.spines[["top", "right", "left", "bottom"]].set_visible(False)
    ax.tick_params(left=False, pad=16)  # labels clear of the counts centred on year 0
    return ax


def figure(curve_steps: pd.DataFrame | None, per_person_steps: pd.DataFrame | None,
           threshold: int) -> Figure:
    """A panel and numbers-at-risk row per recurrence model (first-recurrence models first)."""
    panels = [rows for frame in (curve_steps, per_person_steps) if frame is not None
              for _, rows in frame.groupby("model", sort=False)]
    heights = []
    for rows in panels:
        heights += [3.0, 0.35 + 0.16 * rows["group"].nunique()]
    with plt.rc_context(STYLE):
        fig, axes = plt.subplots(len(heights), 1, figsize=(7, sum(heights) + 0.4),
                                 gridspec_kw={"height_ratios": heights})
        axes = np.atleast_1d(axes)
        for i, rows in enumerate(panels):
            draw(rows, axes[2 * i])
            draw_at_risk(rows, axes[2 * i + 1], threshold)
        fig.tight_layout()
    return fig


def render(curve_steps: pd.DataFrame | None, per_person_steps: pd.DataFrame | None,
           threshold: int) -> tuple[bytes, str]:
    """PNG bytes and SVG text of the curves (reproducible files)."""
    return export(figure(curve_steps, per_person_steps, threshold))


def forest_rows(odds_ratios: pd.DataFrame | None, hazard_ratios: pd.DataFrame) -> pd.DataFrame:
    """Exposure rows of both tables in the forest plot's columns; the model label says which
    ratio each row is when both kinds are shown, and marks death hazard ratios."""
    both = odds_ratios is not None
    hazards = hazard_ratios[hazard_ratios["role"] == "exposure"]
    hazards = hazards.rename(columns={"hazard_ratio": "odds_ratio"}).assign(
        model=[f"{m}{' death' if o == 'death' else ''}{' (HR)' if both else ''}"
               for m, o in zip(hazards["model"], hazards["outcome"])])
    parts = [hazards]
    if both:
        odds = odds_ratios[odds_ratios["role"] == "exposure"]
        parts.insert(0, odds.assign(model=[f"{m} (OR)" for m in odds["model"]]))
    columns = ["model", "term", "level", "role", "per", "odds_ratio", "ci_lower", "ci_upper",
               "flag"]
    return pd.concat([p.reindex(columns=columns) for p in parts], ignore_index=True)


def render_forest(odds_ratios: pd.DataFrame | None, hazard_ratios: pd.DataFrame
                  ) -> tuple[bytes, str]:
    """The forest plot of every model's exposure: odds ratios and hazard ratios."""
    fig = forest.figure(forest_rows(odds_ratios, hazard_ratios))
    fig.axes[0].set_xlabel(("Odds ratio (OR) or hazard ratio (HR)" if odds_ratios is not None
                            else "Hazard ratio") + " (log scale), 95% confidence interval")
    return export(fig)
