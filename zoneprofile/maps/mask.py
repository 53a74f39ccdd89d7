"""Segmenting the crystal from the groundmass and other phases.

The map is block-averaged to at most ``max_side`` pixels a side (memory and
speed on large maps; a block mean also lowers the counting noise), smoothed
with a Gaussian (sigma 1 block), and thresholded with Otsu's method (Otsu 1979,
IEEE Trans. SMC 9:62; scikit-image ``threshold_otsu``). The crystal is the side
of the threshold where the spot analyses lie; if some spots fall on the other
side (a zoned crystal whose zones differ more than crystal and groundmass do),
the three-class Otsu thresholds are tried and the one that keeps every spot on
the crystal side is used. Holes (inclusions) are filled, connected regions are
labelled, and the crystal is the region under the line (most line samples
inside) or the one holding a seed point.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage as ndi

__all__ = ["CrystalMask", "crystal_mask", "block_mean"]


def block_mean(data, factor: int, *, strip_rows: int = 256) -> np.ndarray:
    """Mean over ``factor`` x ``factor`` blocks (ragged last blocks included), as float32.

    Reads ``data`` (ndarray or memory map) in strips of rows so no full-size
    floating-point copy is made.
    """
    rows, cols = data.shape
    if factor == 1:
        return np.asarray(data, dtype=np.float32)
    out_r, out_c = math.ceil(rows / factor), math.ceil(cols / factor)
    out = np.empty((out_r, out_c), dtype=np.float32)
    col_idx = np.arange(0, cols, factor)
    col_n = np.diff(np.append(col_idx, cols)).astype(np.float32)
    strip_blocks = max(1, strip_rows // factor)
    for br0 in range(0, out_r, strip_blocks):
        br1 = min(out_r, br0 + strip_blocks)
        r0, r1 = br0 * factor, min(rows, br1 * factor)
        strip = np.asarray(data[r0:r1], dtype=np.float32)
        summed = np.add.reduceat(strip, col_idx, axis=1)
        row_idx = np.arange(0, r1 - r0, factor)
        row_n = np.diff(np.append(row_idx, r1 - r0)).astype(np.float32)
        summed = np.add.reduceat(summed, row_idx, axis=0)
        out[br0:br1] = summed / row_n[:, None] / col_n[None, :]
    return out


@dataclass
class CrystalMask:
    """The selected crystal on a (possibly block-averaged) grid.

    Attributes
    ----------
    mask : bool ndarray on the reduced grid (True inside the crystal)
    factor : int
        Block size: reduced pixel (i, j) covers full-resolution rows
        ``i*factor ... (i+1)*factor - 1``.
    reduced : float32 ndarray, the block-averaged map
    threshold : float, polarity : +1 (crystal brighter) or -1
    label : int, n_regions : int
    found : bool
        False when no region lies under the line or seed.
    """

    mask: np.ndarray
    factor: int
    reduced: np.ndarray
    threshold: float
    polarity: int
    label: int
    n_regions: int
    found: bool
    shape: tuple
    notes: list = field(default_factory=list)
    _interior: np.ndarray | None = field(default=None, repr=False)

    def contains(self, rows, cols) -> np.ndarray:
        """Whether full-resolution positions (row, col; floats allowed) are in the crystal."""
        r = np.clip(np.floor((np.asarray(rows, float) + 0.5) / self.factor).astype(int), 0, self.mask.shape[0] - 1)
        c = np.clip(np.floor((np.asarray(cols, float) + 0.5) / self.factor).astype(int), 0, self.mask.shape[1] - 1)
        return self.mask[r, c]

    def interior(self, rows, cols) -> np.ndarray:
        """Like :meth:`contains`, but False within about 2 pixels of the crystal edge (mixed pixels)."""
        if getattr(self, "_interior", None) is None:
            self._interior = ndi.binary_erosion(self.mask, iterations=max(1, math.ceil(2 / self.factor)))
        r = np.clip(np.floor((np.asarray(rows, float) + 0.5) / self.factor).astype(int), 0, self.mask.shape[0] - 1)
        c = np.clip(np.floor((np.asarray(cols, float) + 0.5) / self.factor).astype(int), 0, self.mask.shape[1] - 1)
        return self._interior[r, c]

    @property
    def area_px(self) -> int:
        return int(self.mask.sum()) * self.factor**2

    def bbox(self):
        """(r0, r1, c0, c1) of the crystal at full resolution (half-open)."""
        if not self.mask.any():
            return (0, self.shape[0], 0, self.shape[1])
        rr = np.flatnonzero(self.mask.any(axis=1))
        cc = np.flatnonzero(self.mask.any(axis=0))
        f = self.factor
        return (int(rr[0] * f), int(min(self.shape[0], (rr[-1] + 1) * f)),
                int(cc[0] * f), int(min(self.shape[1], (cc[-1] + 1) * f)))

    def to_dict(self) -> dict:
        return {
            "method": "Otsu threshold on the block-averaged map, holes filled, connected region under the line/seed",
            "threshold_signal": float(self.threshold),
            "crystal_brighter": self.polarity > 0,
            "block_px": self.factor,
            "regions_found": self.n_regions,
            "crystal_found": self.found,
            "area_px": self.area_px,
            "bbox_rows_cols": list(self.bbox()),
            "notes": list(self.notes),
        }


def crystal_mask(data, *, line=None, seed_xy=None, crystal_signal=None, max_side=2048) -> CrystalMask:
    """Segment the crystal under ``line`` (x0, y0, x1, y1 px) or at ``seed_xy``.

    Parameters
    ----------
    data : 2-D array-like (rows, cols)
    line : 4 floats, optional
    seed_xy : (x, y) px, optional
    crystal_signal : array, optional
        Map signal at the spot analyses (they lie on the crystal's phase).
    max_side : int
        Largest side of the reduced grid.
    """
    from skimage.filters import threshold_multiotsu, threshold_otsu

    rows, cols = data.shape
    factor = max(1, math.ceil(max(rows, cols) / max_side))
    reduced = block_mean(data, factor)
    smooth = ndi.gaussian_filter(reduced, 1.0)
    notes = []
    t = float(threshold_otsu(smooth))
    ref = None
    if crystal_signal is not None and len(crystal_signal):
        ref = np.asarray(crystal_signal, float)
        polarity = 1 if np.median(ref) >= t else -1
    elif seed_xy is not None or line is not None:
        x, y = seed_xy if seed_xy is not None else (line[2], line[3])
        v = smooth[min(int(round(y)) // factor, smooth.shape[0] - 1), min(int(round(x)) // factor, smooth.shape[1] - 1)]
        polarity = 1 if v >= t else -1
    else:
        polarity = 1
    if ref is not None:
        on_side = np.mean((ref - t) * polarity > 0)
        if on_side < 1.0:
            try:
                cands = [float(c) for c in threshold_multiotsu(smooth, classes=3)]
            except (ValueError, RuntimeError):
                cands = []
            good = [c for c in cands if np.all((ref - c) * polarity > 0)]
            if good:
                # the threshold closest to the spots that keeps them all on the crystal side
                t = max(good) if polarity > 0 else min(good)
                notes.append("three-class Otsu threshold used: spots lay on both sides of the two-class one")
            else:
                edge = ref.min() if polarity > 0 else ref.max()
                beyond = smooth[(smooth - edge) * polarity < 0]
                t = float((edge + np.median(beyond)) / 2) if beyond.size else t
                notes.append("threshold set between the spot signals and the surroundings")
    binary = (smooth - t) * polarity > 0
    binary = ndi.binary_opening(binary, structure=np.ones((3, 3), bool))
    binary = ndi.binary_fill_holes(binary)
    labels, n = ndi.label(binary)
    chosen = 0
    if n:
        if seed_xy is not None:
            r = min(int(round(seed_xy[1])) // factor, labels.shape[0] - 1)
            c = min(int(round(seed_xy[0])) // factor, labels.shape[1] - 1)
            chosen = int(labels[r, c])
        elif line is not None:
            x0, y0, x1, y1 = line
            m = max(2, int(math.hypot(x1 - x0, y1 - y0) / factor) + 1)
            xs, ys = np.linspace(x0, x1, m), np.linspace(y0, y1, m)
            rr = np.clip(np.floor((ys + 0.5) / factor).astype(int), 0, labels.shape[0] - 1)
            cc = np.clip(np.floor((xs + 0.5) / factor).astype(int), 0, labels.shape[1] - 1)
            hits = labels[rr, cc]
            hits = hits[hits > 0]
            if hits.size:
                chosen = int(np.bincount(hits).argmax())
        else:
            sizes = np.bincount(labels.ravel())
            sizes[0] = 0
            chosen = int(sizes.argmax())
    found = chosen > 0
    if not found:
        notes.append("no crystal region under the line or seed; profile not trimmed to the crystal")
    mask = labels == chosen if found else np.zeros_like(binary)
    return CrystalMask(mask, factor, reduced, t, polarity, chosen, int(n), found, (rows, cols), notes)
