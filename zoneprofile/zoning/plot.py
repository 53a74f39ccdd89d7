"""The zoning figure: the report's profile panel, drawn by the report's code.

There is one figure system (:mod:`zoneprofile.report.figures`): the zoning
result becomes the record parts a campaign stores (``profile`` and
``zones``) and is drawn by the same panel code, in the one palette of
``report/style.py`` (Okabe & Ito 2008): zones shaded, steps as vertical
lines (reverse solid vermilion, normal dotted blue), resorption surfaces
dash-dot purple, oscillatory bands hatched, every shading in the legend;
rim at 0 µm on the left. See docs/report.md, "Figures".
"""

from __future__ import annotations

__all__ = ["plot_zoning"]


def plot_zoning(result, path=None, *, title=None, value_sd=None, width="double"):
    """Draw a :class:`~zoneprofile.zoning.ZoningResult`; write it to ``path`` (.png, .svg, .pdf) when given.

    ``value_sd`` (1 sd per point) draws error bars; ``title`` is written above
    the panel. Returns the :class:`~zoneprofile.report._canvas.Canvas` (its
    ``matplotlib_figure()`` gives a matplotlib Figure of the same drawing).
    """
    from zoneprofile.report.figures import write_figure, zoning_canvas, zoning_record

    canvas = zoning_canvas(zoning_record(result, value_sd=value_sd), width=width, title=title)
    if path is not None:
        write_figure(canvas, path)
    return canvas
