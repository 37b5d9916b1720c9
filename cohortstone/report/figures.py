"""Shared look and reproducible export of the report's figures."""
from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

STYLE = {"font.family": "DejaVu Sans", "font.size": 9, "svg.hashsalt": "cohortstone",
         "svg.fonttype": "path"}
INK, GREY, GUIDE = "#1b1b1b", "#7a7a7a", "#8a8a8a"


def export(fig: Figure) -> tuple[bytes, str]:
    """PNG bytes and SVG text with no dates or software stamps inside; closes the figure."""
    with plt.rc_context(STYLE):
        png, svg = io.BytesIO(), io.StringIO()
        fig.savefig(png, format="png", dpi=150, metadata={"Software": None})
        fig.savefig(svg, format="svg", metadata={"Date": None, "Creator": None})
    plt.close(fig)
    return png.getvalue(), svg.getvalue()
