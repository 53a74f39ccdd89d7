"""Figure of a dated boundary: data, best fit, initial profile and the Monte Carlo band.

Colours from the Okabe & Ito (2008) colour-blind-safe palette; shapes and line
styles also differ so the figure reads in grey.
"""

from __future__ import annotations

import io

from zoneprofile._units import format_days, format_days_range

_BLUE, _ORANGE, _VERMILLION, _GREY, _PURPLE = "#0072B2", "#E69F00", "#D55E00", "#7f7f7f", "#CC79A7"


def _days_text(d):
    return format_days(d)


def fit_figure(results, *, value_label, an=None, fmt="png") -> bytes:
    """Render one panel per fitted boundary and return the file's bytes."""
    from matplotlib.figure import Figure

    n = len(results)
    fig = Figure(figsize=(7.0, 3.4 * n), constrained_layout=True)
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    for ax, r in zip(axes, results):
        ax.fill_between(r.distance_um, r.band_low, r.band_high, color=_BLUE, alpha=0.22, lw=0,
                        label="95% band of refits")
        ax.plot(r.distance_um, r.initial, color=_GREY, ls="--", lw=1.2, label="initial profile")
        ax.plot(r.distance_um, r.model, color=_BLUE, lw=2.0, label="best fit (with spot)")
        ax.plot(r.data_distance_um, r.data_value, "o", ms=4, mfc="white", mec=_VERMILLION, mew=1.2,
                label="data")
        ax.axvline(r.position_um, color=_ORANGE, ls=":", lw=1.2)
        t = r.time_days
        if r.resolved:
            title = (f"{r.element}, boundary {r.position_um:.1f} µm: {_days_text(t['median'])} "
                     f"(95%: {format_days_range(t['p2_5'], t['p97_5'])}) at {r.temperature_c:g} °C")
        else:
            title = (f"{r.element}, boundary {r.position_um:.1f} µm: not resolved, "
                     f"< {_days_text(t.get('upper_bound'))}")
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("Distance from rim (µm)")
        ax.set_ylabel(value_label)
        handles, labels = ax.get_legend_handles_labels()
        if an is not None and an[0] is not None:
            ax2 = ax.twinx()
            sel = (an[0] >= r.distance_um[0]) & (an[0] <= r.distance_um[-1])
            (line,) = ax2.plot(an[0][sel], an[1][sel], color=_PURPLE, lw=0.8, ls="-.", marker="s", ms=2)
            ax2.set_ylabel("An (mol%)", color=_PURPLE)
            handles.append(line)
            labels.append("An (right axis)")
        ax.legend(handles, labels, fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.22), ncol=5,
                  frameon=False)
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, dpi=150)
    return buf.getvalue()
