"""Visual style of the report: one colour-blind-safe palette, units on every axis.

The palette follows the eight colours proposed by Okabe & Ito (2008, "Color
Universal Design"), which stay distinct for the common forms of colour-vision
deficiency; every series also differs by line style or marker so that a grey
print still reads. Continuous images (maps) use ``cividis`` (Nuñez, Anderton &
Renslow 2018, PLoS ONE 13:e0199239), designed to be perceptually uniform for
deuteranomaly.
"""

from __future__ import annotations

__all__ = ["COLOURS", "SERIES", "LABELS", "MAP_CMAP", "FIG_DPI", "CSS"]

# name -> hex (Okabe & Ito 2008)
COLOURS = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky": "#56B4E9",
    "green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermilion": "#D55E00",
    "purple": "#CC79A7",
    "grey": "#7F7F7F",
}

# role -> (colour, linestyle, marker): each role distinguishable without colour
SERIES = {
    "data": (COLOURS["black"], "none", "o"),
    "flagged": (COLOURS["grey"], "none", "o"),  # drawn hollow: a white face, a grey rim
    "profile": (COLOURS["blue"], "-", "o"),
    "model": (COLOURS["vermilion"], "-", None),
    "initial": (COLOURS["black"], "--", None),
    "band": (COLOURS["orange"], "-", None),
    "step_reverse": (COLOURS["vermilion"], "-", None),
    "step_normal": (COLOURS["blue"], ":", None),
    "resorption": (COLOURS["purple"], "-.", None),
    "ecdf": (COLOURS["blue"], "-", None),
    "dkw": (COLOURS["sky"], "-", None),
    "kde": (COLOURS["green"], "-", None),
    "boundary": (COLOURS["blue"], "none", "o"),
    "unresolved": (COLOURS["grey"], "none", "<"),
}

# the words of every figure, in one place (report and every --plot)
LABELS = {
    "distance": "distance from rim (µm)",
    "band": "95% model band",
    "initial": "initial profile (model)",
    "data": "data (±1 sd)",
    "data_plain": "data",
    "model": "best fit",
    "flagged": "flagged by QC (left out)",
    "flagged_off": "flagged, off scale",
    "zone": "zone (alternate shading)",
    "band_osc": "oscillatory band",
    "resorption": "resorption surface",
    "dated": "dated boundary",
    "boundary": "boundary",
    "traverse": "traverse (rim → core)",
}

# zone shading cycle (light, alternating; zone kind is written in the table)
ZONE_FILLS = ("#E8F1F8", "#FBF0DC", "#E3F4EE", "#F6E6EF")
EVENT_FILLS = ("#D4E9F7", "#F9DCCB", "#D2EFE5", "#F4DCE9", "#FBE3C4")  # light blue, vermilion, green, purple, orange

MAP_CMAP = "cividis"
FIG_DPI = 110


CSS = """
body{font-family:"DejaVu Sans",Arial,Helvetica,sans-serif;margin:0;color:#1a1a1a;background:#fff;line-height:1.45}
main{max-width:1100px;margin:0 auto;padding:1.2em 1.6em 3em}
h1{font-size:1.6em;margin:.4em 0 .2em}
h2{font-size:1.3em;border-bottom:2px solid #0072B2;padding-bottom:.15em;margin-top:1.8em}
h3{font-size:1.1em;margin-top:1.4em}
h4{font-size:1em;margin:1em 0 .3em}
table{border-collapse:collapse;margin:.5em 0 1em;font-size:.86em}
th,td{border:1px solid #c8c8c8;padding:.22em .5em;text-align:left;vertical-align:top}
th{background:#eef3f8}
td.num{text-align:right;font-variant-numeric:tabular-nums}
figure{margin:.8em 0}
figure img{max-width:100%;height:auto;border:1px solid #e0e0e0}
figcaption{font-size:.85em;color:#333}
.caution{border-left:6px solid #D55E00;background:#fdf1e8;padding:.6em 1em;margin:1em 0}
.failed{border-left:6px solid #7F7F7F;background:#f3f3f3;padding:.4em 1em}
.meta{color:#444;font-size:.9em}
nav ul{columns:2;font-size:.92em}
code{font-size:.92em;background:#f4f4f4;padding:0 .2em}
.status-confirmed{color:#006b4f;font-weight:bold}
.status-other{color:#a04000;font-weight:bold}
ul.warnings li{margin:.15em 0}
"""
