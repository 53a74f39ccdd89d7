"""The zoning figure: the profile with its zones, steps, surfaces and bands.

Design: rim on the left at 0 µm, core to the right; zones as alternating pale
grey bands with their number on top; steps as vertical lines, blue for normal
and orange for reverse (Okabe & Ito 2008 colour-blind-safe palette), each with
short level marks on each side (rim side left, core side right); resorption surfaces as a
thick dashed vermilion line marked "R"; oscillatory bands as a hatched strip
along the bottom. Units on both axes.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plot_zoning", "COLOURS"]

#: Okabe & Ito (2008) colour-blind-safe colours used by the figure
COLOURS = {"points": "#000000", "normal": "#0072B2", "reverse": "#E69F00", "resorption": "#D55E00",
           "band": "#009E73", "zone": "#DDDDDD", "fit": "#56B4E9"}

_UNITS = {"An": "mol%", "Ab": "mol%", "Or": "mol%", "Fo": "mol%"}


def plot_zoning(result, path=None, *, title=None, value_sd=None):
    """Draw a :class:`~zoneprofile.zoning.ZoningResult`; save it when ``path`` is given.

    Returns the matplotlib ``Figure`` (no global pyplot state is used).
    """
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    x, y = result.distance_um, result.value
    fig = Figure(figsize=(9.0, 4.2), layout="constrained")
    ax = fig.add_subplot()
    lo, hi = float(np.min(y)), float(np.max(y))
    pad = 0.08 * max(hi - lo, 1e-9)
    ymin, ymax = lo - 2.5 * pad, hi + 2 * pad
    for i, z in enumerate(sorted(result.zones, key=lambda z: z["start_um"])):
        if i % 2 == 0:
            ax.axvspan(z["start_um"], z["end_um"], color=COLOURS["zone"], alpha=0.6, lw=0, zorder=0)
        ax.text(0.5 * (z["start_um"] + z["end_um"]), hi + 1.2 * pad, str(z["zone"]), ha="center", va="bottom",
                fontsize=8, color="#444444")
    for b in result.oscillatory_bands:
        ax.add_patch(Rectangle((b.start_um, ymin), b.end_um - b.start_um, 0.9 * pad, facecolor="none",
                               edgecolor=COLOURS["band"], hatch="////", lw=1.0, zorder=2))
        ax.text(0.5 * (b.start_um + b.end_um), ymin + 1.0 * pad, f"λ {b.wavelength_um:.1f} µm", ha="center",
                va="bottom", fontsize=7, color=COLOURS["band"])
    if value_sd is not None:
        ax.errorbar(x, y, yerr=value_sd, fmt="none", ecolor="#888888", lw=0.6, zorder=3)
    ax.plot(x, y, "o", ms=3.2, mfc="white", mec=COLOURS["points"], mew=0.8, zorder=4, label="analyses")
    for s in result.steps:
        colour = COLOURS[s.kind]
        ax.axvline(s.position_um, color=colour, lw=1.4, zorder=5)
        tick = 0.02 * float(np.ptp(x))  # levels on each side: rim side left, core side right
        ax.plot([s.position_um - tick, s.position_um], [s.after, s.after], color=colour, lw=2.2, zorder=6)
        ax.plot([s.position_um, s.position_um + tick], [s.before, s.before], color=colour, lw=2.2, zorder=6)
    for r in result.resorption_surfaces:
        ax.axvline(r["position_um"], color=COLOURS["resorption"], lw=2.6, ls=(0, (4, 2)), zorder=5)
        ax.text(r["position_um"], hi + 1.2 * pad, "R", color=COLOURS["resorption"], ha="center", va="bottom",
                fontsize=9, fontweight="bold")
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], ls="", marker="o", mfc="white", mec="black", label="analyses"),
               Line2D([], [], color=COLOURS["normal"], label="normal step"),
               Line2D([], [], color=COLOURS["reverse"], label="reverse step"),
               Line2D([], [], color=COLOURS["resorption"], lw=2.6, ls=(0, (4, 2)), label="resorption surface"),
               Rectangle((0, 0), 1, 1, facecolor="none", edgecolor=COLOURS["band"], hatch="////",
                         label="oscillatory band")]
    ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    unit = _UNITS.get(result.column, "")
    ax.set_ylabel(f"{result.column} ({unit})" if unit else result.column)
    ax.set_xlabel("Distance from rim (µm)   rim → core")
    ax.set_xlim(float(x[0]), float(x[-1]))
    ax.set_ylim(ymin, ymax + pad)
    ax.set_title(title or f"Zoning of {result.column}: {len(result.steps)} step(s), "
                 f"{len(result.oscillatory_bands)} oscillatory band(s)", fontsize=10)
    if path is not None:
        fig.savefig(path, dpi=150)
    return fig
