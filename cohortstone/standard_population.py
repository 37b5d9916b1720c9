"""The 2000 US standard population for direct age standardization.

Counts in thousands by five-year age group, the projected year-2000 population used as the
standard by US health statistics (Klein & Schoenborn, *Age adjustment using the 2000 projected
U.S. population*, Healthy People 2010 Statistical Notes No. 20, 2001). The built-in groupings
are sums of these counts; the tests check them against the published proportions.
"""
from __future__ import annotations

from dataclasses import dataclass

# (lower age of the five-year group, count in thousands); the last group is 85 and over.
US2000_FIVE_YEAR = (
    (0, 3795), (1, 15192), (5, 19920), (10, 20057), (15, 19820), (20, 18257), (25, 17722),
    (30, 19511), (35, 22180), (40, 22479), (45, 19806), (50, 17224), (55, 13307), (60, 10654),
    (65, 9410), (70, 8726), (75, 7415), (80, 4900), (85, 4259),
)


@dataclass(frozen=True)
class Standard:
    """Age groups [cuts[i], cuts[i+1]) with the last open-ended, and their standard weights."""

    name: str
    column: str
    cuts: tuple[float, ...]
    weights: tuple[float, ...]  # proportions summing to 1

    def labels(self) -> list[str]:
        from cohortstone.derive import group_labels
        return group_labels(self.cuts)


def us2000(cuts: tuple[float, ...]) -> tuple[float, ...]:
    """Proportions of the 2000 standard in groups starting at `cuts` (ages before the first
    cut are left out, so the proportions describe the covered ages only)."""
    totals = []
    bounds = list(cuts) + [float("inf")]
    for lo, hi in zip(bounds, bounds[1:]):
        totals.append(sum(count for start, count in US2000_FIVE_YEAR if lo <= start < hi))
    whole = sum(totals)
    return tuple(t / whole for t in totals)


ADULT3_CUTS = (20.0, 40.0, 60.0)
ALL_AGES11_CUTS = (0.0, 1.0, 5.0, 15.0, 25.0, 35.0, 45.0, 55.0, 65.0, 75.0, 85.0)
BUILT_IN = {"adult3": ADULT3_CUTS, "all_ages11": ALL_AGES11_CUTS}


def built_in(name: str, column: str = "age_years") -> Standard:
    cuts = BUILT_IN[name]
    return Standard(name=name, column=column, cuts=cuts, weights=us2000(cuts))
