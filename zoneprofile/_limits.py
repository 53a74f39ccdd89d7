"""One table of the valid ranges of numeric options, shared by the command line
and the campaign file.

A value outside its range is refused with the range, before any work: an
absurd standard deviation, beam or seed otherwise runs for minutes and gives
a result that looks resolved (a temperature sd of 10,000 °C gave a 97.5th
percentile of 10^41 days) or fails every crystal later. The ranges are wide
enough for any real session and are given in docs/run-a-campaign.md.
"""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass

from zoneprofile._validation import InputError

__all__ = ["Limit", "LIMITS", "CLI_OPTIONS", "CHOICES", "FIGURE_WIDTH_IN", "FIGURE_PNG_DPI", "check_limit",
           "check_choice", "apply_limits"]


@dataclass(frozen=True)
class Limit:
    """Valid range of one numeric option.

    ``low_open`` makes the lower bound exclusive (a beam of 0 µm is no beam:
    leave the option out instead).
    """

    kind: type  # int or float
    low: float
    high: float
    unit: str = ""
    low_open: bool = False
    why: str = ""

    def show(self, x) -> str:
        return str(int(x)) if self.kind is int else f"{x:g}"

    def describe(self) -> str:
        u = f" {self.unit}" if self.unit else ""
        left = f"above {self.show(self.low)}" if self.low_open else f"from {self.show(self.low)}"
        return f"{left} to {self.show(self.high)}{u}"


LIMITS: dict[str, Limit] = {
    "seed": Limit(int, 0, 2**63 - 1, why="a seed is a non-negative whole number"),
    "draws": Limit(int, 50, 100_000, why="a 2.5-97.5 percentile band needs some 40 draws or more (common practice)"),
    # magma storage temperature: from below the wet granite solidus (~650 °C) to above basalt and
    # picrite liquidus temperatures (~1300-1450 °C), with margin (common practice); docs/run-a-campaign.md
    "temperature_c": Limit(float, 400, 1500, "°C", why="storage temperature of the crystal after the recharge"),
    "temperature_sd_c": Limit(float, 0, 300, "°C", why="1-sigma uncertainty of the temperature"),
    "beam_um": Limit(float, 0, 200, "µm", low_open=True, why="beam diameter; leave it out for no beam correction"),
    "an_beam_um": Limit(float, 0, 200, "µm", low_open=True, why="beam diameter of the An table"),
    "trace_beam_um": Limit(float, 0, 200, "µm", low_open=True, why="beam diameter of the trace-element traverse"),
    "spot_um": Limit(float, 0, 200, "µm", low_open=True, why="spot diameter"),
    "noise_sd": Limit(float, 1e-6, 1e6, why="1-sigma analytical noise, in the column's units"),
    "width_px": Limit(int, 1, 501, "px", why="pixels averaged across a map profile"),
    "radius_um": Limit(float, 0, 1e5, "µm", low_open=True, why="crystal radius (cylinder or sphere); 10 cm at most"),
    # a profile's distances: no crystal traverse is longer than 10 cm
    "distance_um": Limit(float, -1e5, 1e5, "µm", why="distance along a crystal traverse"),
}

#: Print width of a figure, inches: one journal column (~90 mm) or the full page width of two columns
#: (~180 mm); common practice of journals, which ask for 80-90 mm and 170-180 mm (docs/report.md).
FIGURE_WIDTH_IN: dict[str, float] = {"single": 3.54, "double": 7.09}
#: Resolution of PNG figures at their print width (300 dpi: common practice of journals for line art
#: with shading; docs/report.md).
FIGURE_PNG_DPI = 300

#: Options that take one word from a fixed list: key -> (choices, default, why). The command line
#: (argparse ``choices``) and the campaign file read these.
CHOICES: dict[str, tuple[tuple[str, ...], str, str]] = {
    "figure_width": (tuple(FIGURE_WIDTH_IN), "double",
                     "print width of figures: single (one column, 90 mm) or double (two columns, 180 mm)"),
}

#: Options of each command checked against :data:`LIMITS` (argparse ``dest``).
CLI_OPTIONS: dict[str, tuple[str, ...]] = {
    "fit": ("seed", "draws", "temperature_c", "temperature_sd_c", "beam_um", "an_beam_um", "radius_um"),
    "zones": ("noise_sd", "temperature_c"),
    "map": ("width_px", "spot_um"),
    "recalc": ("beam_um",),
}


def _message(key: str, value, name: str) -> str | None:
    """Why ``value`` is refused for ``key``, or None when it is valid (``name`` may be '')."""
    lim = LIMITS[key]
    name = f"{name} " if name else ""
    u = f" {lim.unit}" if lim.unit else ""
    valid = f"valid: {lim.describe()}"
    if lim.kind is int:
        if isinstance(value, bool) or not isinstance(value, int):
            return f"{name}must be a whole number ({valid}), got {value!r}"
    elif isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return f"{name}must be a finite number ({valid}), got {value!r}"
    if value < lim.low or (lim.low_open and value == lim.low):
        bound = f"above {lim.show(lim.low)}" if lim.low_open else f"at least {lim.show(lim.low)}"
        return f"{name}must be {bound}{u} ({valid}), got {value:g}{u}"
    if value > lim.high:
        return f"{name}must be at most {lim.show(lim.high)}{u} ({valid}), got {value:g}{u}"
    return None


def check_limit(key: str, value, name: str | None = None):
    """Return ``value`` if it lies in the range of ``key``; else raise :class:`InputError`."""
    message = _message(key, value, name or key)
    if message:
        raise InputError(message)
    return value


def check_choice(key: str, value, name: str | None = None) -> str:
    """Return ``value`` if it is one of the choices of ``key``; else raise :class:`InputError`."""
    choices = CHOICES[key][0]
    if not isinstance(value, str) or value not in choices:
        raise InputError(f"{name or key} must be one of {', '.join(choices)}, got {value!r}")
    return value


def _parse(text: str, kind: type):
    """A number as typed on the command line: no underscores, no nan/inf words."""
    s = str(text).strip()
    if "_" in s:
        raise ValueError(s)
    if kind is int:
        return int(s)
    x = float(s)
    if not math.isfinite(x):
        raise ValueError(s)
    return x


def apply_limits(command: str, parser: argparse.ArgumentParser) -> None:
    """Make the numeric options of ``command`` parse strictly and check their range.

    A refused value is an argparse usage error: one line, exit code 2.
    """
    keys = CLI_OPTIONS.get(command, ())
    for action in parser._actions:
        if action.dest not in keys or not action.option_strings:
            continue
        key = action.dest

        def convert(text, key=key):
            kind = LIMITS[key].kind
            try:
                value = _parse(text, kind)
            except (TypeError, ValueError, OverflowError):
                what = "a whole number" if kind is int else "a finite number"
                raise argparse.ArgumentTypeError(
                    f"must be {what} (valid: {LIMITS[key].describe()}), got '{text}'") from None
            message = _message(key, value, "")
            if message:
                raise argparse.ArgumentTypeError(message)
            return value

        convert.__name__ = LIMITS[key].kind.__name__
        action.type = convert
