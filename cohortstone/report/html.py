"""The self-contained HTML report: tables, inline SVG figure, methods paragraph, cautions."""
from __future__ import annotations

import html
from typing import Any

import pandas as pd

from cohortstone.config.spec import Study
from cohortstone.exposure import Coding
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


def _e(value: Any) -> str:
    return html.escape(str(value))


def coding_text(coding: Coding) -> str:
    if coding.kind == "continuous":
        return f"`{coding.column}` as a continuous term (odds ratio per {coding.per:g} units)"
    levels = ", ".join(coding.levels[1:])
    what = {"cuts": "groups by cut points", "quantiles": "weighted quantile groups",
            "categorical": "categories"}[coding.kind]
    return f"`{coding.column}` in {what} {levels} against the reference {coding.reference}"


def methods_text(study: Study, info: dict) -> str:
    """One paragraph describing exactly what was done, generated from the config and the run."""
    d = study.design
    parts = []
    if d is None:
        parts.append("Odds ratios were estimated by unweighted logistic regression (maximum "
                     "likelihood) with model-based standard errors; 95% confidence intervals "
                     "use the normal distribution.")
    else:
        pieces = [f"weighted by `{d.weight}`" if d.weight else "without weights"]
        design = []
        if d.strata:
            design.append(f"strata `{d.strata}`")
        design.append(f"clusters `{d.cluster}`" if d.cluster else "each person as a cluster")
        parts.append(
            f"Odds ratios were estimated by logistic regression {pieces[0]}, with variance by "
            f"Taylor-series linearisation ({', '.join(design)}; clusters treated as sampled "
            "with replacement within strata). 95% confidence intervals and p-values use the t "
            "distribution with design degrees of freedom: clusters minus strata, counting only "
            "those holding members of the model's analysis population "
            f"({info['df_text']}).")
        if d.single_cluster_strata == "overall_mean":
            parts.append("Strata holding a single cluster were centred on the mean of all "
                         "cluster totals.")
    if study.population:
        conds = "; ".join(f"`{c.text}`" for c in study.population)
        parts.append(f"The analysis population was {conds}; it was applied by giving everyone "
                     "else zero weight, keeping every record for variance estimation.")
    parts.append("People missing the outcome, the exposure or a covariate of a model left that "
                 "model's population (complete-case analysis; counts are in the flow table).")
    for model, codings in info["codings"].items():
        parts.append(f"Model {model}: " + "; ".join(coding_text(c) for c in codings) + ".")
    parts.append("For grouped exposures, the p for trend treats each group's weighted median "
                 "as a score, and the joint test of the groups is an adjusted Wald F test "
                 "(Korn & Graubard, 1990).")
    versions = info["versions"]
    parts.append(f"Software: cohortstone {versions.get('cohortstone')}, Python "
                 f"{versions.get('python')}, numpy {versions.get('numpy')}, pandas "
                 f"{versions.get('pandas')}, scipy {versions.get('scipy')}.")
    return " ".join(parts)


def _table(frame: pd.DataFrame, numeric: set[str]) -> str:
    head = "".join(f'<th class="{"num" if c in numeric else ""}">{_e(c)}</th>'
                   for c in frame.columns)
    body = []
    for _, row in frame.iterrows():
        cells = "".join(f'<td class="{"num" if c in numeric else ""}">{_e(row[c])}</td>'
                        for c in frame.columns)
        body.append(f"<tr>{cells}</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _ratio_view(rows: pd.DataFrame) -> pd.DataFrame:
    view = pd.DataFrame({
        "Term": rows["term"],
        "Level": [lv if isinstance(lv, str) and lv else (f"per {p:g}" if pd.notna(p) else "")
                  for lv, p in zip(rows["level"], rows["per"])],
        "n": rows["n"].astype(int),
        "Cases": rows["cases"].astype(int),
        "Odds ratio (95% CI)": [interval_text(o, lo, hi) for o, lo, hi in
                                zip(rows["odds_ratio"], rows["ci_lower"], rows["ci_upper"])],
        "p": [p_text(p) for p in rows["p_value"]],
    })
    return view


def page(study: Study, odds_ratios: pd.DataFrame, forest_svg: str, info: dict) -> str:
    title = study.title or study.name
    out = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
           f"<title>{_e(title)}</title><style>{CSS}</style></head><body>",
           f"<h1>{_e(title)}</h1>",
           f"<p class=\"note\">Analysis <code>{_e(study.name)}</code> — odds ratios of a binary "
           "outcome by exposure, adjusted for the listed covariates.</p>"]
    if info.get("invented"):
        out.append(f"<div class=\"banner\"><strong>Invented data.</strong> This report runs on "
                   f"{_e(info['invented'])}. Its numbers show how the tool works; they are not "
                   "findings about any real population.</div>")
    out.append("<h2>Data</h2>")
    out.append(f"<p>Source: {_e(info['source_text'])}.</p>")
    if info["inputs"]:
        out.append(_table(pd.DataFrame([{"File": k, "SHA-256": v}
                                        for k, v in info["inputs"].items()]), set()))
    out.append("<h2>Who was analysed</h2>")
    out.append(_table(pd.DataFrame(info["flow"]), {"People"}))
    out.append("<h2>Odds ratios</h2>")
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
        out.append(_table(_ratio_view(rows), {"n", "Cases", "Odds ratio (95% CI)", "p"}))
    out.append("<h2>Forest plot</h2><figure>" + _strip_xml_header(forest_svg)
               + "<figcaption class=\"note\">Exposure odds ratios with 95% confidence intervals "
               "(log scale; dashed line at 1).</figcaption></figure>")
    out.append(f"<h2>Methods</h2><p>{_e(methods_text(study, info))}</p>")
    out.append("<h2>Cautions</h2><ul>" + "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS)
               + "</ul>")
    out.append("</body></html>\n")
    return "\n".join(out)


def _strip_xml_header(svg: str) -> str:
    """The SVG element alone, without the XML prologue and the metadata block."""
    svg = svg[svg.find("<svg"):]
    start, end = svg.find("<metadata>"), svg.find("</metadata>")
    if start >= 0 and end > start:
        svg = svg[:start] + svg[end + len("</metadata>"):]
    return svg
