"""The one time formatter: unit by magnitude, a range in one unit, no silent exponent."""

import math

import pytest

from zoneprofile._units import DAYS_PER_YEAR, days_unit, format_days, format_days_range


def test_julian_year():
    # IAU Julian year: 365.25 days exactly
    assert DAYS_PER_YEAR == 365.25


@pytest.mark.parametrize("days, text", [
    (0.5, "12 h"), (0.0104166, "0.25 h"), (1.0, "1 d"), (42.49, "42.5 d"), (99.94, "99.9 d"),
    (420.4, "420 d"), (1095.0, "1095 d"), (3 * 365.25, "3 yr"), (7.3 * 365.25, "7.3 yr"),
    (250 * 365.25, "250 yr"), (-2.0, "-2 d"),
])
def test_unit_chosen_by_magnitude(days, text):
    assert format_days(days) == text


@pytest.mark.parametrize("bad", [None, float("nan"), float("inf"), "x"])
def test_missing_is_na(bad):
    assert format_days(bad) == "n/a"


def test_no_exponent_between_100_days_and_3_years():
    # every whole number of days from 100 to the switch to years is written out in full
    for d in range(100, 1096):
        assert "e" not in format_days(float(d)) and format_days(float(d)).endswith(" d")


def test_range_in_one_unit_of_its_larger_end():
    assert format_days_range(0.5, 3.2) == "0.5 – 3.2 d"
    assert format_days_range(0.1, 0.4) == "2.4 – 9.6 h"
    assert format_days_range(400, 2000) == "1.1 – 5.48 yr"
    assert format_days_range(None, 3.0) == "n/a – 3 d"
    assert format_days_range(None, None) == "n/a"


def test_value_round_trips_within_rounding():
    # the written value, read back in its unit, is within half a unit of the third significant figure
    for d in (0.37, 5.123, 88.8, 321.6, 2500.0):
        number, unit = format_days(d).split()
        factor = days_unit(d)[1]
        assert unit in ("h", "d", "yr")
        assert math.isclose(float(number) / factor, d, rel_tol=5e-3)
