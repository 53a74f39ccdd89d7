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
