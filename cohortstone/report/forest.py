"""Forest plot of the exposure odds ratios of every model (log axis, line at 1)."""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter

from cohortstone.report.figures import GUIDE, INK, STYLE, export
from cohortstone.report.tables import interval_text


def _labels(rows: pd.DataFrame) -> list[str]:
    out = []
    for _, r in rows.iterrows():
        what = r["level"] if isinstance(r["level"], str) and r["level"] else (
            f"per {r['per']:g}" if pd.notna(r["per"]) else "")
        out.append(f"{r['model']}: {r['term']} {what}".strip())
    return out


def draw(table: pd.DataFrame, ax: Axes) -> Axes:
    """Draw exposure rows of `table` on `ax`; flagged or reference rows carry text, no bar."""
    rows = table[table["role"] == "exposure"].reset_index(drop=True)
    y = np.arange(len(rows))[::-1]
    ok = rows["ci_lower"].notna().to_numpy()
    ors = rows["odds_ratio"].to_numpy(dtype=float)
    lo, hi = rows["ci_lower"].to_numpy(dtype=float), rows["ci_upper"].to_numpy(dtype=float)
    ax.hlines(y[ok], lo[ok], hi[ok], color=INK, linewidth=1.4)
    ax.plot(ors[ok], y[ok], "s", color=INK, markersize=5)
    ref = rows["odds_ratio"].eq(1.0).to_numpy() & ~ok
    ax.plot(ors[ref], y[ref], "D", markerfacecolor="white", markeredgecolor=INK, markersize=4)
    ax.axvline(1.0, color=GUIDE, linestyle="--", linewidth=1)
    ax.set_xscale("log")
    finite = np.concatenate([lo[ok], hi[ok], [1.0]])
    left, right = finite.min() / 1.25, finite.max() * 1.25
    ax.set_xlim(left, right)
    ticks = [t for t in (0.1, 0.2, 0.25, 0.5, 0.75, 1, 1.5, 2, 3, 4, 5, 10) if left <= t <= right]
    ax.xaxis.set_major_locator(FixedLocator(ticks))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_yticks(y, _labels(rows))
    ax.set_ylim(-0.8, len(rows) - 0.2)
    ax.set_xlabel("Odds ratio (log scale), 95% confidence interval")
    for yi, (_, r) in zip(y, rows.iterrows()):
        text = interval_text(r["odds_ratio"], r["ci_lower"], r["ci_upper"])
        if isinstance(r["flag"], str) and r["flag"]:
            text = "not estimated: " + r["flag"].split(":")[0]
        ax.annotate(text, xy=(1.02, yi), xycoords=("axes fraction", "data"), va="center",
                    fontsize=8.5, color=INK)
    ax.spines[["top", "right"]].set_visible(False)
    return ax


def figure(table: pd.DataFrame) -> Figure:
    """A new figure holding the forest plot; pyplot is used only to create it."""
    rows = table[table["role"] == "exposure"]
    n = len(rows)
    longest = max((len(s) for s in _labels(rows)), default=10)
    height = 1.0 + 0.3 * max(n, 1)
    width = 5.5 + 0.075 * longest
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(width, height))
        draw(table, ax)
        fig.subplots_adjust(left=(0.075 * longest + 0.3) / width, right=1 - 1.9 / width,
                            top=1 - 0.15 / height, bottom=0.75 / height)
    return fig


def render(table: pd.DataFrame) -> tuple[bytes, str]:
    """PNG bytes and SVG text of the forest plot (reproducible files)."""
    return export(figure(table))
