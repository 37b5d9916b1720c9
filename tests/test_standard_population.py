"""The 2000 US standard population and the built-in age groupings."""
from __future__ import annotations

import pytest

from cohortstone.standard_population import US2000_FIVE_YEAR, built_in


def test_the_counts_add_up_to_the_published_total():
    # Klein & Schoenborn, Healthy People 2010 Stat Notes 20 (2001): 274,634 thousand
    assert sum(count for _, count in US2000_FIVE_YEAR) == 274_634


def test_adult_three_group_weights_are_the_published_ones():
    # NHANES tutorial, age standardization module: 20-39 77,670 / 195,850 = 0.396579;
    # 40-59 72,816 and 60+ 45,364 (sum 195,850)
    w = built_in("adult3").weights
    assert w == pytest.approx((77_670 / 195_850, 72_816 / 195_850, 45_364 / 195_850), rel=1e-12)
    assert round(w[0], 6) == 0.396579


def test_all_ages_eleven_group_weights_are_the_published_ones():
    # Klein & Schoenborn (2001), table: the eleven-group distribution, rounded to six
    # decimals in the publication (so compared to within 1e-6)
    published = [0.013818, 0.055317, 0.145565, 0.138646, 0.135573, 0.162613, 0.134834,
                 0.087247, 0.066037, 0.044842, 0.015508]
    assert built_in("all_ages11").weights == pytest.approx(published, abs=1e-6)
    assert built_in("all_ages11").labels() == ["0", "1-4", "5-14", "15-24", "25-34", "35-44",
                                               "45-54", "55-64", "65-74", "75-84", "85+"]
