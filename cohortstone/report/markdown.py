"""`tables.md`: the report's tables as Markdown, for pasting into manuscripts."""
from __future__ import annotations

import pandas as pd

from cohortstone.config.spec import Study
from cohortstone.report import views
from cohortstone.report.cells import rule_text


def table(frame: pd.DataFrame, right: set[str] = frozenset()) -> str:
    """A pipe table; columns in `right` are right-aligned."""
    def cell(value: object) -> str:
        return str(value).replace("|", "\\|").replace("\n", " ")
    head = "| " + " | ".join(cell(c) for c in frame.columns) + " |"
    rule = "| " + " | ".join("---:" if c in right else "---" for c in frame.columns) + " |"
    body = ["| " + " | ".join(cell(v) for v in row) + " |" for row in frame.itertuples(index=False)]
    return "\n".join([head, rule, *body])


def document(study: Study, estimates, info: dict) -> str:
    threshold = study.report.suppress_counts_below
    parts = [f"# {study.title or study.name}", ""]
    if info.get("invented"):
        parts += [f"*Invented data ({info['invented']}): not findings about any real "
                  "population.*", ""]
    parts += ["## Who was analysed", "", table(views.flow(info["flow"], threshold), {"People"}),
              ""]
    if estimates.table1 is not None:
        parts += ["## Table 1", "", "Weighted means (SE) and percentages (SE) with unweighted n.",
                  "", table(views.table1(estimates.table1, threshold)), ""]
    if estimates.prevalence is not None:
        parts += ["## Prevalence", "", table(views.prevalence(estimates.prevalence, threshold),
                                             {"n", "df"}), ""]
    if estimates.odds_ratios is not None:
        for model, rows in estimates.odds_ratios.groupby("model", sort=False):
            parts += [f"## Odds ratios: {model}", "",
                      table(views.ratios(rows, threshold), {"n", "Cases", "p"}), ""]
    if threshold > 1:
        parts += [rule_text(threshold), ""]
    return "\n".join(parts)
