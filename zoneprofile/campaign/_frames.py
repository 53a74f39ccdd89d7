"""Small helpers on the tables a crystal's stages share."""

from __future__ import annotations

import numpy as np


def _column(frame, name):
    """The column ``name`` as floats, or None when absent or with fewer than three finite values."""
    if frame is None or name not in frame.columns:
        return None
    values = np.asarray(frame[name], dtype=float)
    if np.count_nonzero(np.isfinite(values)) < 3:
        return None
    return values


def _column_sd(frame, name):
    """The 1-sigma precision column ``{name}_sd`` as floats, or None when absent."""
    sd_name = f"{name}_sd"
    if frame is None or sd_name not in frame.columns:
        return None
    return np.asarray(frame[sd_name], dtype=float)


def usable_sd(x, v, sd, name, warnings):
    """``sd`` at the analyses a fit keeps (finite position and value), or None.

    A precision column with a blank or non-positive cell among those analyses
    is not used (one precision per point or none, as ``zoneprofile fit``
    decides); ``warnings`` then gets one sentence saying so.
    """
    if sd is None:
        return None
    keep = np.isfinite(np.asarray(x, float)) & np.isfinite(np.asarray(v, float))
    kept = np.asarray(sd, float)[keep]
    bad = int(np.count_nonzero(~np.isfinite(kept) | (kept <= 0)))
    if bad:
        note = (f"{name}_sd is blank or not positive for {bad} of the {kept.size} analyses fitted, so it is not "
                "used: the noise is estimated from the fit's residuals; fill every cell to weight by it")
        if note not in warnings:
            warnings.append(note)
        return None
    return kept
