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
    result = getattr(estimates, "recurrence", None)
    if result is not None:
        parts += _recurrence(result, threshold)
    if threshold > 1:
        parts += [rule_text(threshold), ""]
    return "\n".join(parts)


def _recurrence(result, threshold: int) -> list[str]:
    """Hazard ratios per model and outcome, curves at fixed years, the PH check."""
    parts: list[str] = []
    for (model, outcome), rows in result.hazard_ratios.groupby(["model", "outcome"], sort=False):
        title = model if outcome == "recurrence" else f"{model}, death before a recurrence"
        parts += [f"## Hazard ratios: {title}", "", f"{rows['analysis'].iloc[0]}; "
                  f"{rows['ties'].iloc[0]} ties; variance {rows['variance'].iloc[0]}.", "",
                  table(views.hazard_ratios(rows, threshold), {"n", "Events", "p"}), ""]
    for frame, value, heading in ((result.curve, "cumulative_recurrence",
                                   "Cumulative recurrence, % (95% CI)"),
                                  (result.per_person, "mean_recurrences",
                                   "Mean recurrences per person (95% CI)")):
        if frame is None:
            continue
        for model, rows in frame.groupby("model", sort=False):
            view = views.recurrence_curve(rows, threshold, value)
            parts += [f"## {heading}: {model}", "",
                      table(view, {c for c in view.columns if c != "Group"}), ""]
    for model, rows in result.proportional_hazards.groupby("model", sort=False):
        parts += [f"## Proportional-hazards check: {model}", "",
                  table(views.proportional_hazards(rows), {"Chi-square", "df", "p"}), ""]
    return parts
