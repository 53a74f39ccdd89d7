"""One time formatter: a range is written in one unit, chosen by its larger end (zoneprofile/_units.py)."""

import re
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

import zoneprofile
from zoneprofile._units import format_days, format_days_range

_RANGE = re.compile(r"^(\S+) – (\S+) (h|d|yr)$")
_DAYS = st.floats(min_value=1e-6, max_value=1e7, allow_nan=False, allow_infinity=False)


@settings(max_examples=300, deadline=None)
@given(_DAYS, _DAYS)
def test_a_range_never_mixes_units(a, b):
    lo, hi = sorted((a, b))
    text = format_days_range(lo, hi)
    m = _RANGE.match(text)
    assert m, text  # "<number> – <number> <unit>": one unit, at the end
    unit = m.group(3)
    factor = {"h": 24.0, "d": 1.0, "yr": 1 / 365.25}[unit]
    # both numbers are in that unit: they read back to the times within the 3-significant-figure rounding
    for shown, days in ((m.group(1), lo), (m.group(2), hi)):
        assert abs(float(shown) - days * factor) <= 0.006 * days * factor + 1e-12 * factor
    # the unit is the one the larger end takes alone
    assert format_days(hi).endswith(" " + unit)


def test_the_case_of_the_issue_reads_in_days():
    # 0.00015 d and 1.64 d once read "0.0036 h – 1.64 d"
    assert format_days_range(0.00015, 1.64) == "0.00015 – 1.64 d"


def test_no_other_days_formatter_in_the_package():
    # every figure, table and title writes times through zoneprofile/_units.py
    root = Path(zoneprofile.__file__).parent
    defs = [p.relative_to(root).as_posix() for p in root.rglob("*.py")
            if re.search(r"^def format_days\b", p.read_text(encoding="utf-8"), re.M)]
    assert defs == ["_units.py"]
