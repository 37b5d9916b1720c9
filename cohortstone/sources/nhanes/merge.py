"""The `nhanes` source: read each cycle's files, merge on SEQN, harmonize, weight, stack.

Only the demographics file and the components the config's columns need are read. Every
other file is merged onto the demographics rows by `SEQN` (the respondent number), so nobody
is dropped: people outside a component's subsample get missing values there and weight 0
when that subsample's weight is used. Strata are nested within cycle.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from cohortstone.errors import DataError
from cohortstone.checksums import sha256
from cohortstone.sources.nhanes import cache, fluids, foods, recode, weights
from cohortstone.sources.nhanes.cycles import COLUMN_COMPONENT, CYCLES, DAY1, components_for
from cohortstone.sources.nhanes.files import Located, locate, missing_message, read_xpt, require

DEMOGRAPHICS = ("RIDAGEYR", "RIAGENDR", "RIDRETH1", "SDMVSTRA", "SDMVPSU")
VARIABLES = {"body_measures": ("BMXBMI",), "diabetes": ("DIQ010",), "kidney": ("KIQ026",),
             "day1_totals": fluids.REQUIRED, "day1_foods": foods.VARIABLES}


def load(spec, columns: list[str], write_cache: bool = True) -> tuple[pd.DataFrame, dict]:
    """The harmonized table of `spec.cycles` and the record of what was read and done."""
    food_map = foods.load_map(spec.foods)
    beverage_columns = set(food_map.columns())
    components = components_for(columns, beverage_columns)
    located = locate(spec.dir, spec.cycles, components)
    if located.missing:
        raise DataError(missing_message(spec.dir, located, _reasons(columns, beverage_columns)))
    plan = weights.plan(spec.cycles, components, columns, beverage_columns)
    hashes = {key: sha256(path) for key, path in located.found.items()}
    foods_sha = sha256(food_map.file) if "day1_foods" in components else None
    cache_key = cache.key({located.found[k].name: h for k, h in hashes.items()}, spec.cycles,
                          components, foods_sha)
    hit = cache.read(spec.cache, cache_key) if spec.cache is not None else None
    if hit is not None:
        frame, record = hit
        record["cache"] = {"status": "read", "file": str(cache.entry(spec.cache, cache_key))}
    else:
        frame, record = _build(spec, components, located, plan, food_map)
        record["cache"] = {"status": "off"}
        if spec.cache is not None:
            status = cache.write(spec.cache, cache_key, frame, record) if write_cache \
                else "not written (check only reads the cache)"
            record["cache"] = {"status": status, "file": str(cache.entry(spec.cache, cache_key))}
    # what depends on the config's own columns is never taken from the cache
    record["weights"] = {"level": plan.level, "variables": plan.variables,
                         "factors": plan.factors, "years": plan.years, "reason": plan.reason,
                         "combination": plan.combination, "text": weights.text(plan)}
    record["notes"] = record.pop("file_notes") + _absent_items(frame, columns)
    record["dir"] = str(spec.dir)
    record["files"] = [{"cycle": c, "component": comp, "file": str(located.found[(c, comp)]),
                        "rows": record["rows"][c][comp], "sha256": hashes[(c, comp)]}
                       for c, comp in located.found]
    if foods_sha is not None:
        record["beverages"]["map_sha256"] = foods_sha
    return frame, record


def _reasons(columns: list[str], beverage_columns: set[str]) -> dict[str, str]:
    reasons = {"demographics": "every analysis (age, sex, weights and design)"}
    for column in dict.fromkeys(columns):
        comps = [COLUMN_COMPONENT[column]] if column in COLUMN_COMPONENT else (
            ["day1_totals", "day1_foods"] if column in beverage_columns else [])
        for comp in comps:
            if comp != "demographics":
                reasons[comp] = (reasons[comp] + ", " if comp in reasons else "") + f"`{column}`"
    return reasons


def _build(spec, components: list[str], located: Located, plan: weights.WeightPlan,
           food_map: foods.FoodMap) -> tuple[pd.DataFrame, dict]:
    record: dict = {"source": "nhanes", "cycles": list(spec.cycles), "components": components,
                    "rows": {}, "answers": {}, "age": [], "missing_codes": [], "fluids": [],
                    "beverages": {"map": str(food_map.file)}, "file_notes": [],
                    "people_with_weight": {}}
    frames = []
    for name in spec.cycles:
        paths = {comp: located.found[(name, comp)] for comp in components}
        frames.append(_cycle(name, paths, plan, food_map, record))
        if CYCLES[name].caution:
            record["file_notes"].append(f"{name}: {CYCLES[name].caution}")
    frame = pd.concat(frames, ignore_index=True)
    record["design"] = {"weight": "weight", "strata": "strata = cycle:SDMVSTRA (nested within "
                        "cycle)", "cluster": "psu = SDMVPSU"}
    return frame, record


def _cycle(name: str, paths: dict[str, Path], plan: weights.WeightPlan,
           food_map: foods.FoodMap, record: dict) -> pd.DataFrame:
    cycle = CYCLES[name]
    demo_path = paths["demographics"]
    demo = read_xpt(demo_path)
    own_weight = plan.level != DAY1
    require(demo, demo_path, DEMOGRAPHICS + ((plan.variables[name],) if own_weight else ()))
    _check_release(demo, cycle.release, name, demo_path)
    frame, age = recode.demographics(demo, name)
    record["age"].append(age)
    rows = {"demographics": len(demo)}
    seqn = demo["SEQN"]
    weight = demo[plan.variables[name]] if own_weight else None
    raws = {}
    for comp in paths:
        if comp == "demographics":
            continue
        path = paths[comp]
        raw = read_xpt(path)
        extra = (plan.variables[name],) if comp == "day1_totals" else ()
        require(raw, path, VARIABLES[comp] + extra, unique=comp != "day1_foods")
        _subset_of(raw["SEQN"], seqn, path, demo_path)
        rows[comp] = len(raw)
        raws[comp] = raw if comp == "day1_foods" else _onto(seqn, raw)
    record["rows"][name] = rows
    if "body_measures" in raws:
        frame["bmi"] = raws["body_measures"]["BMXBMI"].to_numpy()
    if "diabetes" in raws:
        values, counts = recode.diabetes(raws["diabetes"], name)
        frame["diabetes"] = values.to_numpy()
        record["missing_codes"] += counts
    if "kidney" in raws:
        stones, counts = recode.stones(raws["kidney"], name)
        frame[list(stones.columns)] = stones.to_numpy()
        record["missing_codes"] += counts
        own = raws["kidney"][raws["kidney"]["_in_file"]]
        record["answers"][name] = recode.stone_answers(own)
    if "day1_totals" in raws:
        totals = raws["day1_totals"]
        intake, fluid_record, notes = fluids.fluids(totals, name, paths["day1_totals"].name)
        frame[list(intake.columns)] = intake.to_numpy()
        record["fluids"].append(fluid_record)
        record["file_notes"] += notes
        weight = totals[plan.variables[name]]
        if "day1_foods" in raws:
            drinks, food_record = foods.beverages(raws["day1_foods"], seqn,
                                                  fluids.usable(totals), food_map)
            frame[list(drinks.columns)] = drinks.to_numpy()
            record["beverages"][name] = food_record
    frame["weight"] = _weight(weight, plan, name, paths)
    record["people_with_weight"][name] = int((frame["weight"] > 0).sum())
    frame["strata"] = demo["SDMVSTRA"].map(lambda s: None if pd.isna(s) else f"{name}:{s:g}")
    frame["psu"] = demo["SDMVPSU"].to_numpy()
    return frame


def _onto(seqn: pd.Series, raw: pd.DataFrame) -> pd.DataFrame:
    """`raw` aligned to the demographics rows by SEQN (people not in `raw`: missing)."""
    marked = raw.assign(_in_file=True)
    merged = pd.DataFrame({"SEQN": seqn.to_numpy()}).merge(marked, on="SEQN", how="left",
                                                           validate="one_to_one")
    merged["_in_file"] = merged["_in_file"].eq(True)
    return merged


def _subset_of(seqn: pd.Series, people: pd.Series, path: Path, demo_path: Path) -> None:
    extra = ~seqn.isin(people)
    if extra.any():
        raise DataError(f"data.dir: {path.name} holds {int(extra.sum())} respondent(s) (SEQN "
                        f"{int(seqn[extra].iloc[0])}, …) who are not in {demo_path.name}; are "
                        "both files from the same cycle?")


def _check_release(demo: pd.DataFrame, release: int | None, name: str, path: Path) -> None:
    """The demographics file's SDDSRVYR must be the cycle's release number [AG-11-16][AKIN]."""
    if release is None or "SDDSRVYR" not in demo:
        return
    found = sorted({int(v) for v in demo["SDDSRVYR"].dropna()})
    if found != [release]:
        raise DataError(f"data.dir: {path.name} has SDDSRVYR {', '.join(map(str, found))}, but "
                        f"{name} files have {release}; the file belongs to another cycle.")


def _weight(raw: pd.Series, plan: weights.WeightPlan, name: str, paths: dict) -> np.ndarray:
    """Raw weight × the cycle's combination factor; outside the subsample (missing) -> 0."""
    values = raw.to_numpy(dtype=float)
    if (values < 0).any():
        source = paths["day1_totals" if plan.level == DAY1 else "demographics"].name
        raise DataError(f"data.dir: {source} has negative {plan.variables[name]} weights.")
    return np.nan_to_num(values, nan=0.0) * plan.factors[name]


def _absent_items(frame: pd.DataFrame, columns: list[str]) -> list[str]:
    """Notes for used columns that some cycles do not have at all (e.g. KIQ029 before 2015)."""
    notes = []
    for column in dict.fromkeys(columns):
        if column in frame and COLUMN_COMPONENT.get(column) == "kidney":
            empty = [c for c, g in frame.groupby("cycle", sort=False)[column] if g.isna().all()]
            if empty:
                notes.append(f"`{column}` is not in the {', '.join(empty)} files (its question "
                             "was not asked then), so it is missing for those cycles.")
    return notes
