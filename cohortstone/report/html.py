"""The self-contained HTML report: tables, inline SVG figure, methods paragraph, cautions."""
from __future__ import annotations

import html
from typing import Any

import pandas as pd

from cohortstone.config.spec import Study
from cohortstone.report import views
from cohortstone.report.cells import rule_text
from cohortstone.report.methods import methods_text
from cohortstone.report.tables import interval_text, p_text

CSS = """
body{font-family:"DejaVu Sans",Arial,sans-serif;color:#1b1b1b;max-width:60rem;margin:2rem auto;
padding:0 1rem;line-height:1.45}
h1{font-size:1.6rem;margin-bottom:.2rem}h2{font-size:1.2rem;border-bottom:1px solid #bbb;
padding-bottom:.2rem;margin-top:2rem}
table{border-collapse:collapse;margin:.6rem 0;font-size:.9rem}
th,td{padding:.25rem .6rem;border-bottom:1px solid #ddd;text-align:left}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
.banner{border:2px solid #555;background:#f2f2f2;padding:.6rem .8rem;margin:1rem 0}
.flag{font-style:italic}
.note{color:#444;font-size:.9rem}
figure{margin:1rem 0}figure svg{max-width:100%;height:auto}
@media print{body{margin:0;max-width:none}.banner{break-inside:avoid}}
"""

CAUTIONS = [
    "These are observational associations. They do not show that a drink or an amount of "
    "fluid causes or prevents kidney stones.",
    "A lifetime history of stones set against current intake invites reverse causation: "
    "people who have had a stone are often advised to drink more.",
    "Adjustment covers only the covariates listed; unmeasured confounding may remain.",
    "Nothing here is medical advice. Decisions about fluids and diet belong with clinicians "
    "and local guidance.",
]
SURVEY_CAUTION = CAUTIONS[1]
RECURRENCE_CAUTIONS = [
    "In a clinic cohort, people who drink more or are prescribed a treatment differ in other "
    "ways too (advice received, severity, follow-up visits); hazard ratios are associations.",
    "A recurrence is counted only when it is detected and recorded: people seen more often "
    "have more chances to have one found, and losses to follow-up are assumed unrelated to "
    "the risk of recurrence.",
]
COMPETING_TEXT = (
    "Two questions, two answers. The cause-specific hazard ratio answers: among people who are "
    "alive and have not yet recurred, is the exposure associated with the rate at which "
    "recurrences happen? (Death simply ends follow-up.) The cumulative incidence answers: what "
    "share of people have had a recurrence by a given time, when some die first? An exposure "
    "that also changes the death rate can move the two in different directions, so read the "
    "death hazard ratios beside the recurrence ones.")


def _e(value: Any) -> str:
    return html.escape(str(value))


def _table(frame: pd.DataFrame, numeric: set[str]) -> str:
    head = "".join(f'<th class="{"num" if c in numeric else ""}">{_e(c)}</th>'
                   for c in frame.columns)
    body = []
    for _, row in frame.iterrows():
        cells = "".join(f'<td class="{"num" if c in numeric else ""}">{_e(row[c])}</td>'
                        for c in frame.columns)
        body.append(f"<tr>{cells}</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _job(study: Study) -> str:
    """One sentence on what this analysis estimates, from the config."""
    asks = []
    if study.describe is not None:
        asks.append("describes the analysis population")
    if study.prevalence is not None:
        asks.append(f"estimates how common `{study.prevalence.outcome}` is")
    logistic = [m for m in study.models if m.type != "recurrence"]
    cohort = [m for m in study.models if m.type == "recurrence"]
    if logistic:
        exposures = sorted({m.exposure for m in logistic})
        asks.append("estimates odds ratios for " + ", ".join(f"`{e}`" for e in exposures))
    if cohort:
        exposures = sorted({m.exposure for m in cohort})
        asks.append("estimates hazard ratios of stone recurrence for "
                    + ", ".join(f"`{e}`" for e in exposures))
    kind = "cohort" if cohort and not logistic and study.prevalence is None else (
        "cross-sectional" if not cohort else "")
    label = ", ".join(w for w in ("design-based" if study.design is not None else "", kind)
                      if w)
    return f"This {label + ' ' if label else ''}analysis " + "; ".join(asks) + "."


def _figure(svg: str, caption: str) -> str:
    return (f"<figure>{_strip_xml_header(svg)}<figcaption class=\"note\">{_e(caption)}"
            "</figcaption></figure>")


def _odds_ratio_section(odds_ratios: pd.DataFrame, svg: str | None, info: dict, threshold: int
                        ) -> list[str]:
    out = ["<h2>Odds ratios</h2>"]
    for model, rows in odds_ratios.groupby("model", sort=False):
        first = rows.iloc[0]
        df_text = "normal distribution" if pd.isna(first["df"]) else f"t with {int(first['df'])} df"
        extra = []
        exp = rows[rows["role"] == "exposure"]
        if exp["p_trend"].notna().any():
            extra.append(f"p for trend {p_text(exp['p_trend'].dropna().iloc[0])}")
        if exp["p_joint"].notna().any():
            extra.append(f"joint test of groups p {p_text(exp['p_joint'].dropna().iloc[0])}")
        out.append(f"<h3>{_e(model)}</h3><p class=\"note\">Outcome "
                   f"<code>{_e(info['outcomes'][model])}</code>; intervals use {df_text}"
                   f"{'; ' + '; '.join(extra) if extra else ''}.</p>")
        if isinstance(first["flag"], str) and first["flag"]:
            out.append(f"<p class=\"flag\">Not estimated: {_e(first['flag'])}.</p>")
        out.append(_table(views.ratios(rows, threshold), {"n", "Cases", "Odds ratio (95% CI)", "p"}))
    if svg is not None:
        out.append("<h2>Forest plot</h2>" + _figure(svg, "Exposure odds ratios with 95% "
                                                     "confidence intervals (log scale; dashed "
                                                     "line at 1)."))
    return out


def _hazard_ratio_section(study: Study, result: Any, threshold: int) -> list[str]:
    out = ["<h2>Hazard ratios</h2>"]
    specs = {m.name: m for m in study.models}
    for (model, outcome), rows in result.hazard_ratios.groupby(["model", "outcome"],
                                                              sort=False):
        first = rows.iloc[0]
        exp = rows[rows["role"] == "exposure"]
        extra = []
        if exp["p_trend"].notna().any():
            extra.append(f"p for trend {p_text(exp['p_trend'].dropna().iloc[0])}")
        if exp["p_joint"].notna().any():
            extra.append(f"joint test of groups p {p_text(exp['p_joint'].dropna().iloc[0])}")
        spec = specs[model].recurrence
        source = {
            "dates": f"dates <code>{_e(spec.index_date)}</code> to <code>"
                     f"{_e(spec.event_date)}</code> or <code>{_e(spec.end_date)}</code>, in "
                     "days / 365.25",
            "counting": f"rows (<code>{_e(spec.start)}</code>, <code>{_e(spec.time)}</code>] "
                        f"with <code>{_e(spec.event)}</code>, person <code>{_e(spec.id)}</code>",
        }.get(spec.form, f"<code>{_e(spec.time)}</code> and <code>{_e(spec.event)}</code>")
        title = model if outcome == "recurrence" else f"{model}: death before a recurrence"
        out.append(f"<h3>{_e(title)}</h3><p class=\"note\">{_e(first['analysis'])}; follow-up "
                   f"from {source}; Cox proportional hazards, {_e(first['ties'])} ties; "
                   f"variance {_e(first['variance'])}; normal-distribution intervals"
                   f"{_e('; ' + '; '.join(extra)) if extra else ''}.</p>")
        if isinstance(first["flag"], str) and first["flag"]:
            out.append(f"<p class=\"flag\">Not estimated: {_e(first['flag'])}.</p>")
        out.append(_table(views.hazard_ratios(rows, threshold),
                          {"n", "Events", "Hazard ratio (95% CI)", "p"}))
    if result.hazard_ratios["outcome"].eq("death").any():
        out.append(f"<p>{_e(COMPETING_TEXT)}</p>")
    return out


def _curve_section(result: Any, svg: str, threshold: int) -> list[str]:
    out = ["<h2>Cumulative recurrence</h2>"]
    if result.curve is not None:
        for model, rows in result.curve.groupby("model", sort=False):
            out.append(f"<h3>{_e(model)}</h3><p class=\"note\">{_e(rows['measure'].iloc[0])}, "
                       "% with 95% interval, and the number still followed and free of "
                       "recurrence at each time (empty beyond the last follow-up).</p>")
            out.append(_table(views.recurrence_curve(rows, threshold), set()))
    if result.per_person is not None:
        for model, rows in result.per_person.groupby("model", sort=False):
            out.append(f"<h3>{_e(model)}: recurrences per person</h3><p class=\"note\">Mean "
                       "cumulative number of recurrences per person with 95% interval "
                       "(robust to several recurrences of one person); death, when recorded, "
                       "ends follow-up.</p>")
            out.append(_table(views.recurrence_curve(rows, threshold, "mean_recurrences"),
                              set()))
    out.append(_figure(svg, "Cumulative recurrence (or mean recurrences per person) over "
                       "follow-up with 95% intervals; numbers at risk below each panel."))
    return out


def _ph_section(result: Any) -> list[str]:
    out = ["<h2>Proportional-hazards check</h2>",
           "<p class=\"note\">Does each hazard ratio stay the same over follow-up? A score test "
           "of a time-varying coefficient per term (the test behind scaled Schoenfeld residual "
           "plots; time on the Kaplan\u2013Meier scale). p &lt; 0.05 is flagged; the tests are not "
           "adjusted for their number, and in a large cohort a small p may reflect a departure "
           "too small to matter.</p>"]
    for model, rows in result.proportional_hazards.groupby("model", sort=False):
        out.append(f"<h3>{_e(model)}</h3>")
        out.append(_table(views.proportional_hazards(rows), {"Chi-square", "df", "p"}))
    return out


def _recurrence_sections(study: Study, result: Any, figures: dict, threshold: int,
                         with_odds: bool) -> list[str]:
    out = _hazard_ratio_section(study, result, threshold)
    out += _curve_section(result, figures["recurrence"], threshold)
    out += _ph_section(result)
    ratios = "odds ratios (OR) and hazard ratios (HR)" if with_odds else "hazard ratios"
    out.append("<h2>Forest plot</h2>" + _figure(figures["forest"], f"Exposure {ratios} with 95% "
                                                "confidence intervals (log scale; dashed line "
                                                "at 1)."))
    return out


def _prevalence_section(study: Study, estimates: Any, svg: str) -> list[str]:
    spec = study.prevalence
    out = ["<h2>Prevalence</h2>",
           f"<p class=\"note\">Outcome <code>{_e(spec.outcome)}</code>. Estimates marked "
           "<em>suppress</em> are left blank here and kept in <code>prevalence_full.csv</code>; "
           "<em>review</em> marks estimates to read with care (NCHS Data Presentation Standards "
           "for Proportions, 2017).</p>",
           _table(views.prevalence(estimates.prevalence, study.report.suppress_counts_below),
                  {"n", "Prevalence, % (95% CI)", "Age-standardized, % (95% CI)", "df"}),
           "<p class=\"note\">\u2014 marks a group that does not span every standard age "
           "group, so it is not age-standardized.</p>" if spec.standardize else "",
           _figure(svg, "Prevalence with 95% Korn\u2013Graubard intervals; hollow markers need "
                   "review, suppressed estimates are not drawn.")]
    trend = estimates.prevalence_trend
    if trend is not None:
        r = trend.iloc[0]
        adjusted = f", adjusted for {r['adjusted_for']}" if r["adjusted_for"] else ""
        out.append(f"<p>Linear trend across {_e(r['by'])} ({_e(r['levels'])}): odds ratio per "
                   f"step {_e(interval_text(r['odds_ratio_per_step'], r['ci_lower'], r['ci_upper']))}, "
                   f"p {_e(p_text(r['p_value']))} (t with {int(r['df'])} df{_e(adjusted)}).</p>")
    return out


def _changes_section(changes: pd.DataFrame) -> list[str]:
    both = changes[changes["status"] == "both"]
    moved = both[both["beyond_intervals"]]
    out = ["<h2>Changes since the previous report</h2>",
           f"<p>{len(both)} estimates appear in both reports; {len(moved)} changed by more than "
           "their intervals allow (|difference| / \u221a(SE\u2081\u00b2 + SE\u2082\u00b2) > "
           f"1.96); {int((changes['status'] == 'new').sum())} are new and "
           f"{int((changes['status'] == 'vanished').sum())} have vanished. The full list is in "
           "<code>changes.csv</code>.</p>"]
    listed = pd.concat([moved, changes[changes["status"] != "both"]])
    if len(listed):
        view = pd.DataFrame({
            "Table": listed["table"], "Estimate": listed["key"], "Status": listed["status"],
            "Before": listed["old"].map(lambda v: "" if pd.isna(v) else f"{v:.4g}"),
            "Now": listed["new"].map(lambda v: "" if pd.isna(v) else f"{v:.4g}"),
        })
        out.append(_table(view, {"Before", "Now"}))
    return out


def page(study: Study, estimates: Any, figures: dict, info: dict) -> str:
    """The whole report; sections for results the config did not ask for are absent."""
    title = study.title or study.name
    threshold = study.report.suppress_counts_below
    out = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
           f"<title>{_e(title)}</title><style>{CSS}</style></head><body>",
           f"<h1>{_e(title)}</h1>",
           f"<p class=\"note\">Analysis <code>{_e(study.name)}</code>. {_e(_job(study))}</p>"]
    if info.get("invented"):
        out.append(f"<div class=\"banner\"><strong>Invented data.</strong> This report runs on "
                   f"{_e(info['invented'])}. Its numbers show how the tool works; they are not "
                   "findings about any real population.</div>")
    out.append("<h2>Data</h2>")
    out.append(f"<p>Source: {_e(info['source_text'])}.</p>")
    if info.get("cycles"):
        out.append(f"<p>Cycles in the analysis population: {_e(', '.join(info['cycles']))}.</p>")
    if info["inputs"]:
        out.append(_table(pd.DataFrame([{"File": k, "SHA-256": v}
                                        for k, v in info["inputs"].items()]), set()))
    out.append("<h2>Who was analysed</h2>")
    out.append(_table(views.flow(info["flow"], threshold), {"People"}))
    if estimates.table1 is not None:
        out.append("<h2>Table 1</h2><p class=\"note\">Weighted means (SE) and percentages (SE) "
                   "with unweighted n.</p>")
        out.append(_table(views.table1(estimates.table1, threshold), set()))
    if estimates.prevalence is not None:
        out += _prevalence_section(study, estimates, figures["prevalence"])
    out += _model_sections(study, estimates, figures, info, threshold)
    if info.get("changes") is not None:
        out += _changes_section(info["changes"])
    out.append(f"<h2>Methods</h2><p>{_e(methods_text(study, info))}</p>")
    if threshold > 1:
        out.append(f"<p class=\"note\">{_e(rule_text(threshold))}</p>")
    if info.get("notes"):
        out.append("<ul class=\"note\">" + "".join(f"<li>{_e(n)}</li>" for n in info["notes"])
                   + "</ul>")
    out.append("<h2>Limitations and cautions</h2><ul>" + "".join(
        f"<li>{_e(c)}</li>" for c in _cautions(study)) + "</ul>")
    out.append("</body></html>\n")
    return "\n".join(out)


def _model_sections(study: Study, estimates: Any, figures: dict, info: dict, threshold: int
                    ) -> list[str]:
    """Odds ratios, then the recurrence models; one forest plot after both."""
    result = getattr(estimates, "recurrence", None)
    out = []
    if estimates.odds_ratios is not None:
        out += _odds_ratio_section(estimates.odds_ratios,
                                   figures["forest"] if result is None else None, info,
                                   threshold)
    if result is not None:
        out += _recurrence_sections(study, result, figures, threshold,
                                    estimates.odds_ratios is not None)
    return out


def _cautions(study: Study) -> list[str]:
    """The general cautions; the survey's reverse-causation caution only where it applies,
    and the cohort's own where recurrence models ran."""
    cohort = any(m.type == "recurrence" for m in study.models)
    survey = study.prevalence is not None or any(m.type != "recurrence" for m in study.models)
    out = [c for c in CAUTIONS if survey or c != SURVEY_CAUTION]
    return out[:-1] + (RECURRENCE_CAUTIONS if cohort else []) + out[-1:]


def _strip_xml_header(svg: str) -> str:
    """The SVG element alone, without the XML prologue and the metadata block."""
    svg = svg[svg.find("<svg"):]
    start, end = svg.find("<metadata>"), svg.find("</metadata>")
    if start >= 0 and end > start:
        svg = svg[:start] + svg[end + len("</metadata>"):]
    return svg
