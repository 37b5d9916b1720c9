"""Beverage groups per person from the day-1 individual-foods file (`DR1IFF_x`).

The food-code map is a YAML data file (`foods.yaml`, shipped; the config's `data.foods`
replaces it). Each food row of the file (`DR1IFDCD` food code, `DR1IGRMS` grams, `DR1IKCAL`
energy) goes to the map row whose prefix is the longest start of its code [CODE-DR]; low-energy
items of rows with a `diet_group` go there instead. A person's `<group>_ml_day` is the sum of
their grams in the group (1 g ≈ 1 ml), 0 when they had none, and missing without a usable
day-1 recall (`DR1DRSTZ` = 1 in the totals file) [DR-CB].
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from cohortstone.config.load import dotted, load_yaml
from cohortstone.errors import ConfigError

SHIPPED = Path(__file__).with_name("foods.yaml")
VARIABLES = ("DR1IFDCD", "DR1IGRMS", "DR1IKCAL")
GROUP = re.compile(r"^[a-z][a-z0-9_]*$")
EXCLUDED = "none"


@dataclass(frozen=True)
class FoodRow:
    prefix: str
    group: str
    diet_group: str | None
    what: str
    source: str


@dataclass(frozen=True)
class FoodMap:
    rows: tuple[FoodRow, ...]
    sums: tuple[tuple[str, tuple[str, ...]], ...]
    diet_kcal_per_100g: float
    file: Path

    def groups(self) -> list[str]:
        """Beverage groups in the order of first mention (diet groups after their parent)."""
        out: list[str] = []
        for row in self.rows:
            for group in (row.group, row.diet_group):
                if group and group != EXCLUDED and group not in out:
                    out.append(group)
        return out

    def columns(self) -> list[str]:
        return [f"{g}_ml_day" for g in self.groups() + [name for name, _ in self.sums]]


def load_map(path: Path | None = None) -> FoodMap:
    """Read and check a food-code map; every fault of the file in one `ConfigError`."""
    path = SHIPPED if path is None else path
    if not path.is_file():
        raise ConfigError(f"data.foods: the food-code map {str(path)!r} does not exist; give "
                          "a YAML file laid out like the shipped foods.yaml.")
    raw = load_yaml(path)
    problems: list[str] = []
    doc = raw.data if isinstance(raw.data, dict) else {}

    def fail(key: tuple, message: str) -> None:
        line = raw.line(key)
        problems.append(f"key `{dotted(key)}`{f' (line {line})' if line else ''}: {message}")

    unknown = set(doc) - {"diet", "sums", "rows"}
    for key in sorted(unknown):
        fail((key,), "unknown key; a food-code map has `diet`, `sums` and `rows`.")
    threshold = _diet(doc.get("diet"), fail)
    rows = _rows(doc.get("rows"), fail)
    sums = _sums(doc.get("sums", {}), rows, fail)
    if problems:
        raise ConfigError(problems, file=str(path))
    return FoodMap(rows=tuple(rows), sums=sums, diet_kcal_per_100g=threshold, file=path)


def _diet(raw, fail) -> float:
    if not isinstance(raw, dict) or not isinstance(raw.get("source"), str):
        fail(("diet",), "expected a mapping with `kcal_per_100g_at_most` and `source`.")
        return 0.0
    value = raw.get("kcal_per_100g_at_most")
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value < 0:
        fail(("diet", "kcal_per_100g_at_most"), f"expected a number of 0 or more, found {value!r}.")
        return 0.0
    return float(value)


def _rows(raw, fail) -> list[FoodRow]:
    if not isinstance(raw, list) or not raw:
        fail(("rows",), "expected a non-empty list of rows (prefix, group, what, source).")
        return []
    out, seen = [], set()
    for i, item in enumerate(raw):
        key = ("rows", i)
        if not isinstance(item, dict):
            fail(key, "expected a mapping with prefix, group, what and source.")
            continue
        for extra in sorted(set(item) - {"prefix", "group", "diet_group", "what", "source"}):
            fail(key + (extra,), "unknown key; a row has prefix, group, diet_group, what, source.")
        prefix = str(item.get("prefix", ""))
        if not re.fullmatch(r"[1-9][0-9]{0,7}", prefix):
            fail(key + ("prefix",), f"expected the first 1 to 8 digits of a food code, found "
                                    f"{item.get('prefix')!r}.")
            continue
        if prefix in seen:
            fail(key + ("prefix",), f"the prefix {prefix!r} appears twice.")
        seen.add(prefix)
        group, diet = item.get("group"), item.get("diet_group")
        if not isinstance(group, str) or not GROUP.match(group):
            fail(key + ("group",), f"expected a snake_case group name or `none`, found {group!r}.")
            continue
        if diet is not None and (not isinstance(diet, str) or not GROUP.match(diet)
                                 or diet == EXCLUDED):
            fail(key + ("diet_group",), f"expected a snake_case group name, found {diet!r}.")
            continue
        _texts(item, key, fail)
        out.append(FoodRow(prefix, group, diet, str(item.get("what", "")),
                           str(item.get("source", ""))))
    return out


def _texts(item: dict, key: tuple, fail) -> None:
    for text in ("what", "source"):
        if not isinstance(item.get(text), str) or not item[text].strip():
            fail(key + (text,), f"every row needs `{text}` (text).")


def _sums(raw, rows: list[FoodRow], fail) -> tuple[tuple[str, tuple[str, ...]], ...]:
    if not isinstance(raw, dict):
        fail(("sums",), "expected a mapping `new_group: [group, group, ...]`.")
        return ()
    groups = {g for r in rows for g in (r.group, r.diet_group) if g and g != EXCLUDED}
    out = []
    for name, parts in raw.items():
        if not GROUP.match(str(name)) or name in groups:
            fail(("sums", name), "expected a new snake_case name, not one of the groups.")
            continue
        if not isinstance(parts, list) or not parts or any(p not in groups for p in parts):
            fail(("sums", name), "expected a list of groups from the rows "
                                 f"({', '.join(sorted(groups))}).")
            continue
        out.append((str(name), tuple(parts)))
    return tuple(out)


def assign(codes: pd.Series, kcal_per_100g: pd.Series, food_map: FoodMap) -> pd.Series:
    """The beverage group of each food row (None where no row places it)."""
    by_prefix = {r.prefix: r for r in food_map.rows}
    lengths = sorted({len(p) for p in by_prefix}, reverse=True)
    text = codes.map(lambda c: "" if pd.isna(c) else str(int(c)))
    rows: dict[str, FoodRow | None] = {}
    for code in text.unique():
        rows[code] = next((by_prefix[code[:n]] for n in lengths if code[:n] in by_prefix), None)
    matched = text.map(rows)
    group = matched.map(lambda r: None if r is None or r.group == EXCLUDED else r.group)
    diet_group = matched.map(lambda r: None if r is None else r.diet_group)
    is_diet = diet_group.notna() & (kcal_per_100g <= food_map.diet_kcal_per_100g)
    return group.where(~is_diet, diet_group)


def beverages(raw: pd.DataFrame, people: pd.Series, usable: pd.Series, food_map: FoodMap
              ) -> tuple[pd.DataFrame, dict]:
    """`<group>_ml_day` for each of `people` (SEQN, in order); missing where not `usable`."""
    grams = raw["DR1IGRMS"].fillna(0.0)
    density = (raw["DR1IKCAL"] / grams.where(grams > 0) * 100.0).fillna(np.inf)
    group = assign(raw["DR1IFDCD"], density, food_map)
    placed = pd.DataFrame({"SEQN": raw["SEQN"], "group": group, "grams": grams}).dropna(
        subset=["group"])
    table = placed.pivot_table(index="SEQN", columns="group", values="grams", aggfunc="sum")
    out = pd.DataFrame(index=people.index)
    for g in food_map.groups():
        values = people.map(table[g]) if g in table else pd.Series(np.nan, index=people.index)
        out[f"{g}_ml_day"] = values.fillna(0.0).where(usable.to_numpy())
    for name, parts in food_map.sums:
        out[f"{name}_ml_day"] = sum(out[f"{p}_ml_day"] for p in parts)
    record = {"food_rows": int(len(raw)),
              "rows_per_group": {g: int(n) for g, n in placed["group"].value_counts()
                                 .sort_index().items()},
              "rows_not_placed": int(len(raw) - len(placed))}
    return out, record
