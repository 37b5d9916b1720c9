"""Display views of the tidy result frames, shared by the HTML page and `tables.md`.

Each view takes a result frame and the small-cell threshold and returns a frame of text
ready to print: intervals as `1.23 (1.05–1.44)`, percentages to one decimal, small counts
withheld.
"""
from __future__ import annotations

import pandas as pd

from cohortstone.prevalence import published
from cohortstone.report.cells import is_small
from cohortstone.report.tables import interval_text, p_text


def count_text(value: object, threshold: int) -> str:
    if value is None or pd.isna(value):
        return ""
    return f"<{threshold}" if is_small(value, threshold) else f"{int(value)}"


def percent_text(value: float, lower: float, upper: float) -> str:
    if pd.isna(value):
        return ""
    return f"{100 * value:.1f} ({100 * lower:.1f}\u2013{100 * upper:.1f})"


def _ratio_rows(rows: pd.DataFrame, threshold: int, ratio: str, ratio_label: str,
                count: str, count_label: str) -> pd.DataFrame:
    return pd.DataFrame({
        "Term": rows["term"],
        "Level": [lv if isinstance(lv, str) and lv else (f"per {p:g}" if pd.notna(p) else "")
                  for lv, p in zip(rows["level"], rows["per"])],
        "n": [count_text(v, threshold) for v in rows["n"]],
        count_label: [count_text(v, threshold) for v in rows[count]],
        f"{ratio_label} (95% CI)": [interval_text(r, lo, hi) for r, lo, hi in
                                    zip(rows[ratio], rows["ci_lower"], rows["ci_upper"])],
        "p": [p_text(p) for p in rows["p_value"]],
    })


def ratios(rows: pd.DataFrame, threshold: int) -> pd.DataFrame:
    """One model's odds-ratio rows: term, level (or unit), n, cases, ratio and interval, p."""
    return _ratio_rows(rows, threshold, "odds_ratio", "Odds ratio", "cases", "Cases")


def hazard_ratios(rows: pd.DataFrame, threshold: int) -> pd.DataFrame:
    """One model's hazard-ratio rows for one outcome: term, level (or unit), n, events, ratio
    and interval, p."""
    return _ratio_rows(rows, threshold, "hazard_ratio", "Hazard ratio", "events", "Events")

def prevalence(rows: pd.DataFrame, threshold: int) -> pd.DataFrame:
    """Prevalence rows with suppressed estimates blanked and the reliability reason shown."""
    shown = published(rows)
    view = pd.DataFrame({
        "Group": ["everyone" if b == "all" else f"{b}: {g}"
                  for b, g in zip(shown["by"], shown["group"])],
        "n": [count_text(v, threshold) for v in shown["n"]],
        "Prevalence, % (95% CI)": [percent_text(p, lo, hi) for p, lo, hi in
                                   zip(shown["prevalence"], shown["ci_lower"], shown["ci_upper"])],
        "df": shown["df"].map(lambda d: "" if pd.isna(d) else str(int(d))),
        "Reliability": [w if not r else f"{w}: {r}" for w, r in
                        zip(shown["reliability"], shown["reliability_reason"])],
    })
    if "adjusted_prevalence" in shown.columns:
        view.insert(3, "Age-standardized, % (95% CI)", [
            percent_text(p, lo, hi) or ("\u2014" if r.startswith("not standardized") else "")
            for p, lo, hi, r in
            zip(shown["adjusted_prevalence"], shown["adjusted_ci_lower"],
                shown["adjusted_ci_upper"], shown["adjusted_reliability_reason"])])
    return view


def table1(rows: pd.DataFrame, threshold: int) -> pd.DataFrame:
    """Table 1 in wide form: one row per characteristic, one column per group."""
    rows = rows.copy()
    rows["cell"] = [
        "" if pd.isna(e) else (f"{e:.1f}% ({s:.1f})" if stat == "percent" else f"{e:.2f} ({s:.2f})")
        + f" [n={count_text(n, threshold)}]"
        for e, s, stat, n in zip(rows["estimate"], rows["se"], rows["statistic"], rows["n"])]
    rows["heading"] = ["Everyone" if b == "all" else f"{b} = {g}"
                       for b, g in zip(rows["by"], rows["group"])]
    rows["Characteristic"] = [c if not lv else f"{c}: {lv}" for c, lv in
                              zip(rows["column"], rows["level"])]
    order = list(dict.fromkeys(rows["heading"]))
    wide = rows.pivot_table(index="Characteristic", columns="heading", values="cell",
                            aggfunc="first", sort=False).reindex(columns=order)
    missing = rows[rows["group"] == "all"].groupby("column", sort=False)["missing"].first()
    wide["Missing (everyone)"] = [count_text(missing[c.split(": ")[0]], threshold) or "0"
                                  for c in wide.index]
    return wide.reset_index().fillna("")


def flow(rows: list[dict], threshold: int) -> pd.DataFrame:
    """The analysis population step by step (STROBE item 13)."""
    frame = pd.DataFrame(rows)
    frame["People"] = [count_text(v, threshold) for v in frame["People"]]
    return frame


def recurrence_curve(rows: pd.DataFrame, threshold: int, value: str = "cumulative_recurrence"
                     ) -> pd.DataFrame:
    """Curve values at fixed years: one row per group, one column per year (% or mean count,
    with the interval) and the numbers at risk beneath in their own columns."""
    percent = value == "cumulative_recurrence"
    rows = rows.copy()
    rows["cell"] = [
        "" if pd.isna(v) else (percent_text(v, lo, hi) if percent else
                               f"{v:.2f} ({lo:.2f}\u2013{hi:.2f})")
        for v, lo, hi in zip(rows[value], rows["ci_lower"], rows["ci_upper"])]
    rows["risk"] = [count_text(v, threshold) or "0" for v in rows["at_risk"]]
    out = pd.DataFrame({"Group": list(dict.fromkeys(rows["group"]))})
    for years, part in rows.groupby("years", sort=True):
        label = f"{years:g} y"
        cells = part.set_index("group")
        out[label] = [cells.at[g, "cell"] for g in out["Group"]]
        out[f"at risk {label}"] = [cells.at[g, "risk"] for g in out["Group"]]
    return out


def proportional_hazards(rows: pd.DataFrame) -> pd.DataFrame:
    """The PH check of one model: chi-square, df, p and the verdict in words."""
    return pd.DataFrame({
        "Term": ["all terms together" if t == "GLOBAL" else t for t in rows["term"]],
        "Chi-square": [f"{c:.2f}" for c in rows["chi_square"]],
        "df": rows["df"].astype(int).astype(str),
        "p": [p_text(p) for p in rows["p_value"]],
        "Verdict": rows["verdict"],
    })
