"""Which survey weight an analysis uses, and how the weights of several cycles combine.

- **Choice.** "You must use the weight of the smallest subpopulation that includes all the
  variables you want to include in your analysis" (NHANES weighting tutorial) [TUT-W1]. From
  largest to smallest: interview (`WTINT2YR`) > exam (`WTMEC2YR`) > day-1 dietary (`WTDRD1`)
  [TUT-D]; the pre-pandemic names are `WTINTPRP`, `WTMECPRP`, `WTDRD1PP` [CODE-PP][DR-CB-P].
  Dietary weights also adjust for the over-representation of weekend days [WWEIA05]; no weight
  adjusts for item nonresponse [TUT-D].
- **Combining cycles.** From 2001–2002 on, "multi-year sample weights can be computed by
  simply dividing the 2-year sample weights by the number of 2-year cycles in the analysis"
  (NHANES Analytic Guidelines 2011–2016) [AG-11-16][TUT-W]. The 2017–March 2020 pre-pandemic
  file covers 3.2 years, so each cycle's weight is multiplied by the years it covers over the
  years combined, L_i / ΣL with L = 2 for a regular cycle and 3.2 for that file: 2015–2016 +
  pre-pandemic gives 2/5.2 and 3.2/5.2 (NCHS Series 2 No. 190; pre-pandemic overview brief)
  [AKIN][PP-BRIEF]. With regular cycles only this is the same division by the number of cycles.
- **Never** the 2017–2018 files with the pre-pandemic ones, which already hold them [CB-P].
"""
from __future__ import annotations

from dataclasses import dataclass

from cohortstone.errors import ConfigError
from cohortstone.sources.nhanes.cycles import (COLUMN_COMPONENT, COMPONENTS, CYCLES, DAY1, EXAM,
                                               INTERVIEW, LEVELS, cycle_problems)

LEVEL_WORDS = {INTERVIEW: "interview", EXAM: "examination (MEC)", DAY1: "day-1 dietary recall"}


@dataclass(frozen=True)
class WeightPlan:
    level: str
    variables: dict          # cycle -> weight variable in the files
    factors: dict            # cycle -> multiplier of that cycle's weight
    years: dict              # cycle -> years the cycle covers
    reason: str
    combination: str


def level_of(components: list[str]) -> str:
    """The smallest subsample among the components read [TUT-D]."""
    return max((COMPONENTS[c].level for c in components), key=LEVELS.index)


def factors(cycles: tuple[str, ...]) -> dict[str, float]:
    """Multiplier of each cycle's weight: L_i / ΣL [AG-11-16][AKIN]; refuses the overlap."""
    problems = cycle_problems(list(cycles))
    if problems:
        raise ConfigError("data.cycles: " + " ".join(message for _, message in problems))
    total = sum(CYCLES[c].years for c in cycles)
    return {c: CYCLES[c].years / total for c in cycles}


def plan(cycles: tuple[str, ...], components: list[str], columns: list[str],
         beverage_columns: set[str]) -> WeightPlan:
    """The weight of the smallest subsample the config's columns need, combined over cycles."""
    level = level_of(components)
    years = {c: CYCLES[c].years for c in cycles}
    multipliers = factors(cycles)
    variables = {c: CYCLES[c].weight_variable(level) for c in cycles}
    return WeightPlan(level=level, variables=variables, factors=multipliers, years=years,
                      reason=_reason(level, columns, beverage_columns),
                      combination=_combination(cycles, years))


def _reason(level: str, columns: list[str], beverage_columns: set[str]) -> str:
    def level_of_column(column: str) -> str | None:
        if column in beverage_columns:
            return DAY1
        component = COLUMN_COMPONENT.get(column)
        return COMPONENTS[component].level if component else None

    used = [c for c in dict.fromkeys(columns) if level_of_column(c) == level]
    names = ", ".join(f"`{c}`" for c in used) or "only interview columns"
    if level == INTERVIEW:
        return (f"the interview weight, since every column used comes from the household "
                f"interview ({names})")
    return (f"the {LEVEL_WORDS[level]} weight, because {names} "
            f"{'was' if len(used) == 1 else 'were'} measured in that subsample, the smallest "
            "that includes every variable analysed (NHANES weighting tutorial: use the weight "
            "of the smallest subpopulation; interview > examination > day-1 dietary recall)")


def _combination(cycles: tuple[str, ...], years: dict) -> str:
    if len(cycles) == 1:
        return "one cycle, so the weights are used as published"
    total = sum(years.values())
    if all(y == 2.0 for y in years.values()):
        return (f"the 2-year weights of the {len(cycles)} cycles were each divided by "
                f"{len(cycles)}, the number of cycles combined (NHANES Analytic Guidelines "
                "2011–2016)")
    parts = ", ".join(f"{years[c]:g}/{total:g} for {c}" for c in cycles)
    return (f"each cycle's weight was multiplied by the years it covers over the {total:g} "
            f"years combined ({parts}), as the guidelines for the 2017–March 2020 pre-pandemic "
            "file prescribe (NCHS Vital Health Stat Series 2 No. 190)")


def text(plan: WeightPlan) -> str:
    """The methods sentence on the weights: which, why, and how cycles were combined."""
    variables = sorted(set(plan.variables.values()))
    return (f"Estimates use {plan.reason}: {', '.join(f'`{v}`' for v in variables)}; "
            f"{plan.combination}. Strata (`SDMVSTRA`) are nested within cycle and the masked "
            "variance pseudo-PSUs (`SDMVPSU`) are the clusters. People outside the subsample "
            "have weight 0 and stay in the design.")
