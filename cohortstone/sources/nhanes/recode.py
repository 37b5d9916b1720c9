"""Survey answer codes -> the harmonized schema: who people are, and their stone history.

- person_id <- SEQN: the respondent number, unique across the continuous cycles.
- age_years <- RIDAGEYR: years; the files top-code age at 80 [OSQ-J], kept at 80 here too.
- sex <- RIAGENDR: 1 male, 2 female (memory: demographics codebook).
- race_ethnicity <- RIDRETH1: 1 mexican_american, 2 other_hispanic, 3 white (non-Hispanic),
  4 black (non-Hispanic), 5 other, including multiracial (memory: demographics codebook).
- bmi <- BMXBMI: kg/m², measured at the examination.
- diabetes <- DIQ010: 1 yes -> 1; 2 no and 3 borderline -> 0 (common practice, no source);
  7 refused, 9 don't know -> missing (memory: diabetes codebook).
- stone_ever <- KIQ026: 1 yes -> 1, 2 no -> 0; 7 refused, 9 don't know -> missing
  [CB-E…CB-P].
- stone_past_year <- KIQ029, 2015–2016 on [CB-I][CB-J][CB-P]: 1 -> 1, 2 -> 0, 7/9 -> missing;
  not asked when KIQ026 = 2 (skip pattern), so 0 there; missing in cycles without it.
- stone_passed_count <- KID028, 2007–2014 [CB-E…CB-H]: count 0–80; 777 refused, 999 don't
  know -> missing; not asked when KIQ026 = 2, so 0 there; missing in cycles without it.

Every refused/don't-know code is counted per cycle, and so is every value the skip pattern
fills, so the manifest says exactly what became missing or zero.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

TOP_CODED_AGE = 80  # [OSQ-J]

# Variable -> {code: meaning} of the answers that become missing.
MISSING_CODES = {
    "KIQ026": {7: "refused", 9: "don't know"},       # [CB-E…CB-P]
    "KIQ029": {7: "refused", 9: "don't know"},       # [CB-I][CB-J][CB-P]
    "KID028": {777: "refused", 999: "don't know"},   # [CB-E…CB-H]
    "DIQ010": {7: "refused", 9: "don't know"},       # (memory: diabetes codebook)
}
SEX = {1.0: "male", 2.0: "female"}
RACE = {1.0: "mexican_american", 2.0: "other_hispanic", 3.0: "white", 4.0: "black",
        5.0: "other"}
STONE_ITEMS = ("KIQ026", "KIQ029", "KID028")


def missing_code_counts(cycle: str, variable: str, column: str, values: pd.Series) -> list[dict]:
    """One row per refused/don't-know code of `variable`: how many answers became missing."""
    return [{"cycle": cycle, "variable": variable, "column": column, "code": code,
             "meaning": meaning, "rows": int((values == code).sum())}
            for code, meaning in MISSING_CODES[variable].items()]


def yes_no(values: pd.Series) -> pd.Series:
    """1 yes -> 1.0, 2 no -> 0.0, anything else (refused, don't know, not asked) -> missing."""
    return values.map({1.0: 1.0, 2.0: 0.0}).astype(float)


def demographics(raw: pd.DataFrame, cycle: str) -> tuple[pd.DataFrame, dict]:
    """Person, age, sex and race/ethnicity columns of every row of the demographics file."""
    age = raw["RIDAGEYR"].astype(float)
    at_top = int((age >= TOP_CODED_AGE).sum())
    out = pd.DataFrame({
        "person_id": raw["SEQN"].astype("int64").to_numpy(),
        "source": "nhanes",
        "cycle": cycle,
        "age_years": np.minimum(age.to_numpy(), TOP_CODED_AGE),
        "sex": raw["RIAGENDR"].map(SEX).to_numpy(dtype=object),
        "race_ethnicity": raw["RIDRETH1"].map(RACE).to_numpy(dtype=object),
    })
    return out, {"cycle": cycle, "age_top_coded_at": TOP_CODED_AGE, "rows_at_top_code": at_top}


def diabetes(raw: pd.DataFrame, cycle: str) -> tuple[pd.Series, list[dict]]:
    """DIQ010 -> 0/1; borderline counts as no, and how many were borderline is recorded."""
    values = raw["DIQ010"]
    out = values.map({1.0: 1.0, 2.0: 0.0, 3.0: 0.0}).astype(float)
    counts = missing_code_counts(cycle, "DIQ010", "diabetes", values)
    counts.append({"cycle": cycle, "variable": "DIQ010", "column": "diabetes", "code": 3,
                   "meaning": "borderline, counted as 0", "rows": int((values == 3).sum())})
    return out, counts


def stones(raw: pd.DataFrame, cycle: str) -> tuple[pd.DataFrame, list[dict]]:
    """stone_ever, stone_past_year and stone_passed_count, with the counts of what changed.

    `raw` is the kidney file merged onto the demographics rows (people outside the file have
    every item missing). Items a cycle lacks stay missing for the whole cycle.
    """
    ever_code = raw["KIQ026"]
    never = ever_code == 2.0
    counts = missing_code_counts(cycle, "KIQ026", "stone_ever", ever_code)
    out = pd.DataFrame({"stone_ever": yes_no(ever_code)}, index=raw.index)

    if "KIQ029" in raw:
        code = raw["KIQ029"]
        past = yes_no(code)
        counts += missing_code_counts(cycle, "KIQ029", "stone_past_year", code)
        fill = never & code.isna()
        counts.append(_skip_row(cycle, "KIQ029", "stone_past_year", int(fill.sum())))
        out["stone_past_year"] = past.mask(fill, 0.0)
    else:
        out["stone_past_year"] = np.nan

    if "KID028" in raw:
        code = raw["KID028"]
        refused = code.isin(list(MISSING_CODES["KID028"]))
        counts += missing_code_counts(cycle, "KID028", "stone_passed_count", code)
        fill = never & code.isna()
        counts.append(_skip_row(cycle, "KID028", "stone_passed_count", int(fill.sum())))
        out["stone_passed_count"] = code.mask(refused).mask(fill, 0.0).astype(float)
    else:
        out["stone_passed_count"] = np.nan
    return out, counts


def _skip_row(cycle: str, variable: str, column: str, rows: int) -> dict:
    return {"cycle": cycle, "variable": variable, "column": column, "code": "not asked",
            "meaning": "KIQ026 = 2 (never had a stone), so 0", "rows": rows}


def stone_answers(raw: pd.DataFrame) -> dict[str, dict[str, int]]:
    """Answer counts of the stone items a kidney file holds (for `check` and the manifest)."""
    from cohortstone.sources.nhanes.files import answer_counts
    out = {}
    for item in STONE_ITEMS:
        if item not in raw:
            continue
        if item == "KID028":
            values = raw[item]
            coded = values.where(values.isin(list(MISSING_CODES[item])) | values.isna(), -1)
            counts = answer_counts(coded)
            out[item] = {"answered": counts.pop("-1", 0), **counts}
        else:
            out[item] = answer_counts(raw[item])
    return out
