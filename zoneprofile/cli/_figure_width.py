"""The ``--figure-width`` option of the plotting commands (choices from zoneprofile/_limits.py)."""

from __future__ import annotations

__all__ = ["add_figure_width"]


def add_figure_width(parser) -> None:
    from zoneprofile._limits import CHOICES, FIGURE_PNG_DPI

    choices, default, why = CHOICES["figure_width"]
    parser.add_argument("--figure-width", choices=choices, default=default, metavar="single|double",
                        help=f"{why}; PNG at {FIGURE_PNG_DPI} dpi at that width, SVG/PDF as vectors "
                             f"(default {default})")
