"""The survey's cycles, its component files, and which schema column needs which file.

Facts, with the keys of `../shared/domain.md`:

- Stone items (`KIQ026`) start in 2007–2008 [CB-E]; files per cycle carry a letter suffix
  (`KIQ_U_E` … `KIQ_U_J`), the 2017–March 2020 pre-pandemic files a `P_` prefix [CB-P], and
  August 2021–August 2023 the suffix `L` [L-URL].
- The pre-pandemic file already holds the 2017–2018 participants, so the two are never
  stacked [CB-P][PP-BRIEF].
- Its weights cover 3.2 years, a regular cycle's 2 years [AKIN][PP-BRIEF].
- Release numbers (`SDDSRVYR`): 1–3 for 1999–2004 [AG-11-16], so 5 for 2007–2008 on to
  10 for 2017–2018, with 9 for 2015–2016 [AKIN]; 66 for the pre-pandemic file [AKIN].
- 2021–2023 uses a new sample design with low response rates [L-BRIEF][L-REL]; its stone items
  were not checked against the codebook [domain.md §1]; its dietary recalls may have been
  taken by telephone [DR2IFF-L].
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass

INTERVIEW, EXAM, DAY1 = "interview", "exam", "day-1 dietary"
LEVELS = (INTERVIEW, EXAM, DAY1)  # largest to smallest subsample [TUT-D]


@dataclass(frozen=True)
class Cycle:
    name: str               # our key in the config, e.g. "2015-2016"
    letter: str             # the publisher's file letter
    years: float            # years of sampling the cycle's weights represent
    first_year: int         # folder of the publisher's download address
    release: int | None     # expected SDDSRVYR on the demographics file (None: not checked)
    prepandemic: bool = False
    caution: str = ""

    def file_stem(self, component: "Component") -> str:
        """The publisher's name of this cycle's file of `component` (no extension)."""
        if self.prepandemic:
            return f"P_{component.stem}"
        return f"{component.stem}_{self.letter}"

    def weight_variable(self, level: str) -> str:
        """Weight of a subsample: `WTINT2YR`/`WTMEC2YR`/`WTDRD1` [TUT-W][DR-CB]; the
        pre-pandemic file's `WTINTPRP`/`WTMECPRP`/`WTDRD1PP` [CODE-PP][DR-CB-P]."""
        names = ({INTERVIEW: "WTINTPRP", EXAM: "WTMECPRP", DAY1: "WTDRD1PP"} if self.prepandemic
                 else {INTERVIEW: "WTINT2YR", EXAM: "WTMEC2YR", DAY1: "WTDRD1"})
        return names[level]


# [L-BRIEF][L-REL][DR2IFF-L]; domain.md §1 for the unchecked stone items.
L_CAUTION = ("August 2021–August 2023 used a new sample design and had low response rates; the "
             "publisher allows combining it with earlier cycles but asks analysts to read its "
             "overview brief first. Its stone items were not checked against the codebook by "
             "cohortstone's authors, and its dietary recalls may have been taken by telephone.")

CYCLES: dict[str, Cycle] = {c.name: c for c in (
    Cycle("2007-2008", "E", 2.0, 2007, 5),
    Cycle("2009-2010", "F", 2.0, 2009, 6),
    Cycle("2011-2012", "G", 2.0, 2011, 7),
    Cycle("2013-2014", "H", 2.0, 2013, 8),
    Cycle("2015-2016", "I", 2.0, 2015, 9),
    Cycle("2017-2018", "J", 2.0, 2017, 10),
    Cycle("2017-2020", "P", 3.2, 2017, 66, prepandemic=True),
    Cycle("2021-2023", "L", 2.0, 2021, None, caution=L_CAUTION),
)}
PREPANDEMIC_OVERLAP = ("2017-2018", "2017-2020")


@dataclass(frozen=True)
class Component:
    name: str       # our word, used by `fetch --components`
    stem: str       # the publisher's file name stem
    level: str      # the subsample it was measured in
    what: str


COMPONENTS: dict[str, Component] = {c.name: c for c in (
    Component("demographics", "DEMO", INTERVIEW, "demographics and design variables"),
    Component("body_measures", "BMX", EXAM, "body measures (BMI), measured at the exam"),
    Component("diabetes", "DIQ", INTERVIEW, "diabetes questionnaire"),
    Component("kidney", "KIQ_U", INTERVIEW, "kidney conditions – urology (stone items)"),
    Component("day1_totals", "DR1TOT", DAY1, "day-1 total nutrient intakes (water, moisture)"),
    Component("day1_foods", "DR1IFF", DAY1, "day-1 individual foods (beverages)"),
)}

# Schema column -> the component it comes from (the contract's harmonized schema).
COLUMN_COMPONENT = {
    **{c: "demographics" for c in ("person_id", "source", "cycle", "age_years", "sex",
                                  "race_ethnicity", "weight", "strata", "psu")},
    "bmi": "body_measures",
    "diabetes": "diabetes",
    **{c: "kidney" for c in ("stone_ever", "stone_past_year", "stone_passed_count")},
    **{c: "day1_totals" for c in ("water_l_day", "tap_water_l_day", "bottled_water_l_day",
                                  "moisture_l_day", "total_fluid_l_day")},
}


def cycle_problems(names: list) -> list[tuple[int | None, str]]:
    """Problems with a list of cycle names: (list index or None, message). Empty when fine."""
    problems: list[tuple[int | None, str]] = []
    for i, name in enumerate(names):
        if str(name) not in CYCLES:
            close = difflib.get_close_matches(str(name), list(CYCLES), n=1, cutoff=0.6)
            hint = f" Did you mean `{close[0]}`?" if close else ""
            problems.append((i, f"unknown cycle {name!r}.{hint} Known cycles: "
                                f"{', '.join(CYCLES)} (2017-2020 is the 2017–March 2020 "
                                "pre-pandemic file)."))
    seen = set()
    for i, name in enumerate(names):
        if name in seen:
            problems.append((i, f"the cycle {name!r} is listed twice."))
        seen.add(name)
    if all(c in names for c in PREPANDEMIC_OVERLAP):
        problems.append((None, "the cycles 2017-2018 and 2017-2020 cannot be combined: the "
                               "2017–March 2020 pre-pandemic files already hold every "
                               "2017–2018 participant, and their weights are valid only for the "
                               "combined file (publisher's pre-pandemic overview brief). Keep "
                               "2017-2020 alone, or 2017-2018 alone."))
    return problems


def components_for(columns: list[str], beverage_columns: set[str]) -> list[str]:
    """The components a list of schema columns needs, in file order; demographics always.

    Beverages come from the individual-foods file; its people with a usable recall and its
    weight come from the day-1 totals file, so both are read.
    """
    needed = {"demographics"}
    for column in columns:
        if column in COLUMN_COMPONENT:
            needed.add(COLUMN_COMPONENT[column])
        elif column in beverage_columns:
            needed |= {"day1_totals", "day1_foods"}
    return [c for c in COMPONENTS if c in needed]
