"""Figure of dated boundaries (``fit --plot``): the report's fit panels, drawn by the report's code.

There is one figure system (:mod:`zoneprofile.report.figures`): each fitted
boundary becomes the record part a campaign stores for it
(:func:`~zoneprofile.report.figures.boundary_entry`) and is drawn by the
same panel code, so ``fit --plot`` and the report show the same drawing
(docs/report.md, "Figures").
"""

from __future__ import annotations

__all__ = ["fit_figure", "fit_canvas_of"]


def fit_canvas_of(results, *, value_sd=None, distance_um=None, width="double"):
    """The canvas of the fit panels of ``results`` (FitResult objects or their ``to_dict()``)."""
    from zoneprofile.report.figures import boundary_entry, fit_canvas

    entries = [boundary_entry(r, value_sd=value_sd, distance_um=distance_um) for r in results]
    return fit_canvas(entries, width=width)


def fit_figure(results, *, fmt="png", value_sd=None, distance_um=None, width="double") -> bytes:
    """The figure of one panel per fitted boundary as the bytes of a ``fmt`` file (png, svg, pdf)."""
    from zoneprofile.report.figures import canvas_bytes

    return canvas_bytes(fit_canvas_of(results, value_sd=value_sd, distance_um=distance_um, width=width), fmt)
