"""The calibrated map as the figures show it: composition inside the crystal, subsampled.

Used by a campaign for each mapped crystal (``campaign/_pictures.py``) and by
``map --plot`` (``maps/plot.py``), so both draw the same picture.
"""

from __future__ import annotations

import numpy as np

__all__ = ["calibrated_image"]


def calibrated_image(info, max_side=700):
    """The map converted to composition, outside the crystal blank, subsampled to ``max_side``.

    Returns ``(image or None, stride)``.
    """
    cal, signal, mask = info.get("_calibration"), info.get("_signal"), info.get("_mask")
    if cal is None or signal is None or not hasattr(cal, "to_composition"):
        return None, 1
    rows, cols = np.shape(signal)
    stride = max(1, int(np.ceil(max(rows, cols) / max_side)))
    sub = np.asarray(signal[::stride, ::stride], dtype=np.float32)
    image = np.asarray(cal.to_composition(sub), dtype=float)
    m = getattr(mask, "mask", None)
    factor = int(getattr(mask, "factor", 1) or 1)
    if m is not None:
        r = np.minimum(np.arange(0, rows, stride) // factor, m.shape[0] - 1)
        c = np.minimum(np.arange(0, cols, stride) // factor, m.shape[1] - 1)
        inside = np.asarray(m)[np.ix_(r, c)]
        image = np.where(inside, image, np.nan)
    return image, stride
