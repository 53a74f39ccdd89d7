"""A small vector canvas for the report's figures: one drawing, written as SVG, PNG or PDF.

Why not matplotlib's axes: a crystal figure is drawn once per crystal, for
every crystal of a campaign, and matplotlib's artist machinery (tick objects,
text layout, two full renders for PNG and SVG) costs ~0.2 s per figure at
best; this canvas draws the same picture in a few tens of milliseconds. The
population figures (chronology, events) use it too, so that a run imports
matplotlib only for a PDF.

The model is a list of primitives in pixel coordinates (origin top left, y
down) at :data:`DPI`: polylines, polygons, rectangles (optionally hatched),
segment sets, marker sets, an RGBA image and text. Back ends:

* :meth:`Canvas.svg` writes them as SVG elements (text stays text);
* :meth:`Canvas.png` rasterises them with Pillow, shapes at twice the size
  and box-filtered down (anti-aliasing), text with FreeType at the final size;
* :meth:`Canvas.pdf` replays them onto a matplotlib figure (PDF only on
  request, so its speed does not matter).

:class:`Axes` adds what a plot needs on top: data-to-pixel mapping (linear,
or logarithmic in x), "nice" ticks (:func:`log_ticks` on a log axis), grid,
spines, labels, full-height bands, and :func:`legend`.
"""

from __future__ import annotations

import base64
import io
import math
from functools import lru_cache
from xml.sax.saxutils import escape, quoteattr

import numpy as np

from zoneprofile.report.style import FIG_DPI

__all__ = ["DPI", "PT", "Canvas", "Axes", "autoscale", "colour_bar", "colour_bar_width", "colour_image", "legend",
           "legend_columns", "log_tick_labels", "log_ticks", "nice_ticks", "step_xy", "text_width", "tick_labels"]

DPI = FIG_DPI
PT = DPI / 72.0  # pixels per point
FONT_FAMILY = "DejaVu Sans, Verdana, Arial, Helvetica, sans-serif"
_SS = 2  # PNG shapes are drawn at this multiple, then box-filtered down

# dash patterns in units of the line width (the usual on/off lengths for -- : -.)
DASHES = {"-": None, "--": (3.7, 1.6), ":": (1.0, 1.65), "-.": (6.4, 1.6, 1.0, 1.6)}

# vertical placement of the baseline, as a fraction of the font size (DejaVu Sans:
# cap height ~0.73 em, descender ~0.24 em)
_BASELINE = {"baseline": 0.0, "top": 0.76, "center": 0.365, "bottom": -0.24}


def _rgb(colour) -> tuple[int, int, int]:
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


@lru_cache(maxsize=None)
def _font_path() -> str:
    """DejaVu Sans as shipped with matplotlib, found without importing matplotlib (~0.3 s)."""
    import importlib.util
    import os

    spec = importlib.util.find_spec("matplotlib")
    for folder in (spec.submodule_search_locations or []) if spec else []:
        path = os.path.join(folder, "mpl-data", "fonts", "ttf", "DejaVuSans.ttf")
        if os.path.isfile(path):
            return path
    import matplotlib

    return f"{matplotlib.get_data_path()}/fonts/ttf/DejaVuSans.ttf"


@lru_cache(maxsize=None)
def _font(size_px: int):
    from PIL import ImageFont

    return ImageFont.truetype(_font_path(), size_px, layout_engine=ImageFont.Layout.BASIC)


def _size(size_pt: float) -> int:
    return max(1, round(size_pt * PT))


@lru_cache(maxsize=8192)
def _width(text: str, size_px: int) -> float:
    return _font(size_px).getlength(text)


def text_width(text: str, size_pt: float) -> float:
    """Width in pixels of one line of ``text`` at ``size_pt`` points."""
    return max((_width(line, _size(size_pt)) for line in str(text).split("\n")), default=0.0)


@lru_cache(maxsize=4096)
def _glyphs(text: str, size_px: int, rotated: bool):
    """Coverage mask of ``text`` and its offset from the baseline start point."""
    from PIL import Image, ImageDraw

    font = _font(size_px)
    left, top, right, bottom = font.getbbox(text, anchor="ls")
    mask = Image.new("L", (max(1, right - left), max(1, bottom - top)), 0)
    ImageDraw.Draw(mask).text((-left, -top), text, font=font, fill=255, anchor="ls")
    if rotated:  # reads bottom to top: text-frame (u, v) -> screen (v, -u)
        return mask.transpose(Image.Transpose.ROTATE_90), top, -right
    return mask, left, top


@lru_cache(maxsize=None)
def _cmap_lut(name: str) -> np.ndarray:
    import matplotlib

    return (matplotlib.colormaps[name](np.linspace(0.0, 1.0, 256)) * 255 + 0.5).astype(np.uint8)


def colour_image(values, cmap: str, vmin=None, vmax=None) -> tuple[np.ndarray, float, float]:
    """RGBA uint8 image of a 2-D array through a colour map; NaN is transparent."""
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    lo = float(np.min(v[finite])) if vmin is None and finite.any() else (vmin if vmin is not None else 0.0)
    hi = float(np.max(v[finite])) if vmax is None and finite.any() else (vmax if vmax is not None else 1.0)
    span = hi - lo if hi > lo else 1.0
    idx = np.clip(((np.where(finite, v, lo) - lo) / span * 255.0 + 0.5).astype(np.int16), 0, 255)
    rgba = _cmap_lut(cmap)[idx]
    rgba[..., 3] = np.where(finite, 255, 0)
    return rgba, lo, hi


def nice_ticks(lo: float, hi: float, max_n: int = 7) -> np.ndarray:
    """Round tick values inside ``[lo, hi]``: steps 1, 2, 2.5 or 5 times a power of ten."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return np.array([lo]) if math.isfinite(lo) else np.empty(0)
    span = hi - lo
    mag = 10.0 ** math.floor(math.log10(span / max(max_n - 1, 1)))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0, 20.0):
        step = m * mag
        first = math.ceil(lo / step - 1e-9)
        last = math.floor(hi / step + 1e-9)
        if last - first + 1 <= max_n:
            break
    return np.arange(first, last + 1) * step


def tick_labels(ticks) -> list[str]:
    """Labels with just enough decimals to tell neighbours apart; a true minus sign."""
    t = np.asarray(ticks, dtype=float)
    if t.size == 0:
        return []
    step = float(np.min(np.diff(t))) if t.size > 1 else max(abs(float(t[0])), 1.0)
    big = float(np.max(np.abs(t)))
    if big >= 1e6 or step < 1e-4:
        out = [f"{v:.3g}" for v in t]
    else:
        decimals = max(0, math.ceil(-math.log10(step) - 1e-9))
        while decimals < 6 and abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6:
            decimals += 1
        out = [f"{v:.{decimals}f}" for v in t]
    return [(s[1:] if s.startswith("-") and float(s) == 0 else s).replace("-", "\u2212") for s in out]


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def log_ticks(lo: float, hi: float, max_n: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Major and minor ticks of a log axis over ``[lo, hi]`` (``0 < lo < hi``).

    Majors are the decades when at least three fall inside (every k-th decade
    when there are more than ``max_n``); over a shorter range 1-2-5 × 10^k,
    then 1-3 × 10^k, then every integer multiple of 10^k, whichever first
    gives 3 to ``max_n`` ticks; failing that, within a factor of 3 round
    linear values (:func:`nice_ticks`), else the largest of those sets with at
    least two ticks. Minors are the other integer
    multiples of 10^k inside the range (the skipped decades when striding).
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo <= 0 or hi <= lo:
        return (np.array([lo]) if math.isfinite(lo) and lo > 0 else np.empty(0)), np.empty(0)
    e0 = math.floor(math.log10(lo) + 1e-9)
    e1 = math.floor(math.log10(hi) + 1e-9)
    exps = np.arange(e0, e1 + 1)
    tol = 1e-9

    def inside(mults):
        v = (np.asarray(mults, float)[None, :] * 10.0 ** exps[:, None]).ravel()
        return np.unique(v[(v >= lo * (1 - tol)) & (v <= hi * (1 + tol))])

    decades = inside([1])
    every = inside(range(1, 10))
    if decades.size > max_n:
        stride = math.ceil(decades.size / max_n)
        e = np.round(np.log10(decades)).astype(int)
        major = decades[e % stride == 0]
        return major, np.setdiff1d(decades, major)
    sets = [decades, inside([1, 2, 5]), inside([1, 3]), every]
    major = next((t for t in sets if 3 <= t.size <= max_n), None)
    if major is None:
        linear = nice_ticks(lo, hi, max_n)
        fits = [t for t in sets if 2 <= t.size <= max_n]
        if (linear.size >= 3 and hi / lo < 3.0) or not fits:
            return linear, np.empty(0)
        major = max(fits, key=lambda t: t.size)
    return major, np.setdiff1d(every, major)


def log_tick_labels(ticks) -> list[str]:
    """Labels of log-axis ticks: plain numbers from 0.001 to 10000 (``'0.1'``, ``'20'``).

    Others are written ``'10⁵'`` or ``'2×10⁵'``.
    """
    out = []
    for v in np.asarray(ticks, dtype=float).tolist():
        if not (v > 0 and math.isfinite(v)):
            out.append(tick_labels([v])[0] if math.isfinite(v) else "")
            continue
        e = math.floor(math.log10(v) + 1e-9)
        if -3 <= e <= 4:
            out.append(f"{v:.6g}")
            continue
        m = v / 10.0**e
        power = "10" + str(e).translate(_SUPERSCRIPT)
        out.append(power if abs(m - 1) < 1e-6 else f"{m:.3g}\u00d7{power}")
    return out


def step_xy(x, y):
    """Vertices of a post-step line: each ``y[i]`` holds from ``x[i]`` to ``x[i + 1]``."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size == 0:
        return x, y
    return np.repeat(x, 2)[1:], np.repeat(y, 2)[:-1]


def _segments(x, y):
    """Runs of finite points of a polyline (a NaN breaks the line)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    if ok.all():
        return [(x, y)] if x.size else []
    edges = np.flatnonzero(np.diff(np.concatenate([[0], ok.astype(np.int8), [0]])))
    return [(x[a:b], y[a:b]) for a, b in zip(edges[::2], edges[1::2])]


def _dash(xs, ys, pattern):
    """Split a polyline into its dashes (arrays of points), ``pattern`` on/off lengths in pixels."""
    pts = np.column_stack([xs, ys])
    if len(pts) < 2:
        return []
    s = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(pts, axis=0).T))])
    total = float(s[-1])
    period = float(sum(pattern))
    if total <= 0 or period <= 0:
        return [pts]
    n = min(int(total / period) + 1, 5000)
    offsets = np.concatenate([[0.0], np.cumsum(pattern)])  # each "on" starts at an even index
    starts = (np.arange(n)[:, None] * period + offsets[0:-1:2][None, :]).ravel()
    ends = np.minimum(starts + np.asarray(pattern[0::2])[None, :].repeat(n, 0).ravel(), total)
    keep = starts < total
    starts, ends = starts[keep], ends[keep]
    ax, ay = np.interp(starts, s, pts[:, 0]), np.interp(starts, s, pts[:, 1])
    bx, by = np.interp(ends, s, pts[:, 0]), np.interp(ends, s, pts[:, 1])
    first = np.searchsorted(s, starts, side="right")
    last = np.searchsorted(s, ends, side="left")
    out = []
    for k in range(starts.size):
        if last[k] > first[k]:
            out.append(np.vstack([[ax[k], ay[k]], pts[first[k]:last[k]], [bx[k], by[k]]]))
        else:
            out.append(np.array([[ax[k], ay[k]], [bx[k], by[k]]]))
    return out


def _radius(shape: str, size_pt: float, edge) -> float:
    """Drawn half-size in pixels: a marker without its own edge gets a 1 pt rim of its colour."""
    return (size_pt + (0.0 if edge or shape == "x" else 1.0)) * PT / 2.0


def _marker_outline(shape: str, x: float, y: float, r: float):
    """Polygon of a marker (pixels) for shapes other than circle and cross."""
    if shape == "s":
        return [(x - r, y - r), (x + r, y - r), (x + r, y + r), (x - r, y + r)]
    if shape == "D":
        q = r * 1.2
        return [(x, y - q), (x + q * 0.8, y), (x, y + q), (x - q * 0.8, y)]
    if shape == "v":
        return [(x - r, y - r * 0.7), (x + r, y - r * 0.7), (x, y + r)]
    if shape == "^":
        return [(x - r, y + r * 0.7), (x + r, y + r * 0.7), (x, y - r)]
    if shape == "<":
        return [(x + r * 0.7, y - r), (x + r * 0.7, y + r), (x - r, y)]
    if shape in ("P", "X"):  # a filled plus; X is the same turned by 45 degrees
        a = r / 3.0
        pts = [(a, r), (a, a), (r, a), (r, -a), (a, -a), (a, -r), (-a, -r), (-a, -a), (-r, -a), (-r, a), (-a, a),
               (-a, r)]
        if shape == "X":
            c = math.sqrt(0.5)
            pts = [((u - v) * c, (u + v) * c) for u, v in pts]
        return [(x + u, y + v) for u, v in pts]
    return [(x - r, y - r), (x + r, y - r), (x + r, y + r), (x - r, y + r)]


def _f(v: float) -> str:
    return f"{v:.1f}".rstrip("0").rstrip(".") if abs(v) < 1e7 else f"{v:.0f}"


def _coords(xs, ys) -> str:
    """``x y x y ...`` rounded to 0.1 px (after an SVG ``M``, further pairs are line-tos)."""
    return " ".join(map(str, np.round(np.column_stack([xs, ys]), 1).ravel().tolist()))


class Canvas:
    """Primitives in pixels (y down); see the module docstring."""

    def __init__(self, width: float, height: float):
        self.exact_width = float(width)  # the print width (PNG at a given dpi, SVG size in points)
        self.width = int(math.ceil(width))
        self.height = int(math.ceil(height))
        self.shapes: list[tuple] = []
        self.texts: list[tuple] = []

    # ------------------------------------------------------------- primitives
    def line(self, x, y, colour, width_pt=1.0, *, dash="-", alpha=1.0):
        """Polyline through pixel points; NaN breaks it; ``dash`` one of ``DASHES``."""
        for xs, ys in _segments(x, y):
            if xs.size >= 2:
                self.shapes.append(("line", xs, ys, colour, width_pt * PT, dash, alpha))

    def polygon(self, x, y, colour, *, alpha=1.0):
        x, y = np.asarray(x, float), np.asarray(y, float)
        ok = np.isfinite(x) & np.isfinite(y)
        if ok.sum() >= 3:
            self.shapes.append(("polygon", x[ok], y[ok], colour, alpha))

    def rect(self, x0, y0, x1, y1, *, fill=None, edge=None, width_pt=0.8, hatch=None, alpha=1.0):
        """Axis-aligned rectangle; ``hatch`` a colour draws 45° lines inside."""
        x0, x1 = sorted((float(x0), float(x1)))
        y0, y1 = sorted((float(y0), float(y1)))
        if x1 - x0 <= 0 or y1 - y0 <= 0:
            return
        self.shapes.append(("rect", x0, y0, x1, y1, fill, edge, width_pt * PT, hatch, alpha))

    def markers(self, x, y, shape, size_pt, face, *, edge=None, alpha=1.0):
        """Markers of diameter ``size_pt``: ``o s D v ^ <`` filled, ``x`` a cross."""
        x, y = np.asarray(x, float), np.asarray(y, float)
        ok = np.isfinite(x) & np.isfinite(y)
        if ok.any():
            self.shapes.append(("markers", x[ok], y[ok], shape, size_pt, face, edge, alpha))

    def segments(self, x0, y0, x1, y1, colour, width_pt=1.0, *, alpha=1.0):
        """Separate straight segments (x0, y0)-(x1, y1) in one stroke: error bars, caps, ticks, rugs."""
        a = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (x0, y0, x1, y1)))
        a = np.column_stack([v.ravel() for v in a]) if a[0].size else np.empty((0, 4))
        a = a[np.isfinite(a).all(axis=1)]
        if a.size:
            self.shapes.append(("segments", a, colour, width_pt * PT, alpha))

    def image(self, rgba, x0, y0, x1, y1):
        """An RGBA uint8 array stretched over a box, nearest-neighbour."""
        self.shapes.append(("image", np.asarray(rgba, dtype=np.uint8), float(x0), float(y0), float(x1), float(y1)))

    def text(self, x, y, s, size_pt, *, colour="#000000", ha="left", va="baseline", rotation=0):
        """Text anchored at (x, y); ``ha``/``va`` are in the text's own frame; rotation 0 or 90."""
        s = str(s)
        if not s:
            return
        size = _size(size_pt)
        lines = s.split("\n")
        step = 1.2 * size
        n = len(lines)
        # the block's anchor -> the first line's baseline offset (down the text frame)
        first = {"top": _BASELINE["top"] * size, "center": _BASELINE["center"] * size - (n - 1) * step / 2,
                 "bottom": _BASELINE["bottom"] * size - (n - 1) * step,
                 "baseline": 0.0}[va]
        for k, line in enumerate(lines):
            dv = first + k * step
            self.texts.append((float(x), float(y), line, size, colour, ha, dv, rotation))

    def _print_width(self) -> float:
        """Width in pixels at ``DPI`` as asked for (not rounded up to whole pixels)."""
        w = getattr(self, "exact_width", self.width)
        return w if abs(w - self.width) < 1 else float(self.width)

    # ------------------------------------------------------------- blocks
    def place(self, sub: "Canvas", x: float = 0.0, y: float = 0.0, *, name: str = "block"):
        """Draw another canvas inside this one with its top left at (x, y) (pixels).

        In SVG the block is one ``<g class="{name}" transform="translate(x y)">``
        holding exactly the elements the block writes on its own, so a figure
        made of blocks contains each block's drawing unchanged (a fit panel from
        ``fit --plot`` is the same drawing as in the report).
        """
        self.shapes.append(("canvas", sub, float(x), float(y), str(name)))

    def flat(self):
        """``(shapes, texts)`` with every placed block moved to its place (for PNG and PDF)."""
        shapes, texts = [], list(self.texts)
        for op in self.shapes:
            if op[0] != "canvas":
                shapes.append(op)
                continue
            _, sub, dx, dy, _ = op
            sub_shapes, sub_texts = sub.flat()
            shapes.extend(_shift(o, dx, dy) for o in sub_shapes)
            texts.extend((x + dx, y + dy, *rest) for x, y, *rest in sub_texts)
        return shapes, texts

    # ------------------------------------------------------------- SVG
    def svg(self) -> bytes:
        """SVG 1.1, text as ``<text>`` elements; its size in points (``DPI`` pixels per inch) for print."""
        w, h = self.width, self.height
        out = [
            '<?xml version="1.0" encoding="utf-8" standalone="no"?>\n',
            f'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
            f'width="{_f(self._print_width() * 72.0 / DPI)}pt" height="{_f(h * 72.0 / DPI)}pt" '
            f'viewBox="0 0 {w} {h}" version="1.1">\n',
            f'<rect x="0" y="0" width="{w}" height="{h}" fill="#ffffff"/>\n',
        ]
        out.extend(self._svg_body([0]))
        out.append("</svg>\n")
        return "".join(out).encode("utf-8")

    def _svg_body(self, clip) -> list:
        out = []
        for op in self.shapes:
            kind = op[0]
            if kind == "canvas":
                _, sub, dx, dy, name = op
                out.append(f'<g class={quoteattr(name)} transform="translate({_f(dx)} {_f(dy)})">\n')
                out.extend(sub._svg_body(clip))
                out.append("</g>\n")
            elif kind == "line":
                _, xs, ys, colour, lw, dash, alpha = op
                d = "M" + _coords(xs, ys)
                pattern = DASHES.get(dash)
                extra = f' stroke-dasharray="{" ".join(_f(p * lw) for p in pattern)}"' if pattern else ""
                if alpha < 1:
                    extra += f' stroke-opacity="{alpha:.3g}"'
                out.append(f'<path d="{d}" fill="none" stroke="{colour}" stroke-width="{lw:.2f}" '
                           f'stroke-linejoin="round" stroke-linecap="butt"{extra}/>\n')
            elif kind == "polygon":
                _, xs, ys, colour, alpha = op
                d = "M" + _coords(xs, ys) + "Z"
                op_ = f' fill-opacity="{alpha:.3g}"' if alpha < 1 else ""
                out.append(f'<path d="{d}" fill="{colour}"{op_} stroke="none"/>\n')
            elif kind == "rect":
                _, x0, y0, x1, y1, fill, edge, lw, hatch, alpha = op
                box = f'x="{_f(x0)}" y="{_f(y0)}" width="{_f(x1 - x0)}" height="{_f(y1 - y0)}"'
                if fill:
                    op_ = f' fill-opacity="{alpha:.3g}"' if alpha < 1 else ""
                    out.append(f'<rect {box} fill="{fill}"{op_} stroke="none"/>\n')
                if hatch:
                    clip[0] += 1
                    segs = " ".join(f"M{_f(a)} {_f(b)} L{_f(c)} {_f(d)}" for a, b, c, d in _hatch(x0, y0, x1, y1))
                    out.append(f'<clipPath id="hatch{clip[0]}"><rect {box}/></clipPath>'
                               f'<path d="{segs}" clip-path="url(#hatch{clip[0]})" fill="none" stroke="{hatch}" '
                               f'stroke-width="1"/>\n')
                if edge:
                    out.append(f'<rect {box} fill="none" stroke="{edge}" stroke-width="{lw:.2f}"/>\n')
            elif kind == "segments":
                _, a, colour, lw, alpha = op
                v = np.round(a, 1).tolist()
                d = "".join(f"M{p} {q}L{r} {t}" for p, q, r, t in v)
                op_ = f' stroke-opacity="{alpha:.3g}"' if alpha < 1 else ""
                out.append(f'<path d="{d}" fill="none" stroke="{colour}" stroke-width="{lw:.2f}"{op_}/>\n')
            elif kind == "markers":
                out.append(_svg_markers(*op[1:]))
            elif kind == "image":
                _, rgba, x0, y0, x1, y1 = op
                shown = _resample(rgba, max(1, round(x1 - x0)), max(1, round(y1 - y0)))
                data = base64.b64encode(_png_bytes(shown)).decode("ascii")
                out.append(f'<image x="{_f(x0)}" y="{_f(y0)}" width="{_f(x1 - x0)}" height="{_f(y1 - y0)}" '
                           f'preserveAspectRatio="none" style="image-rendering:pixelated" '
                           f'xlink:href="data:image/png;base64,{data}"/>\n')
        if not self.texts:
            return out
        out.append(f"<g font-family={quoteattr(FONT_FAMILY)}>\n")
        anchors = {"left": "start", "center": "middle", "right": "end"}
        for x, y, s, size, colour, ha, dv, rot in self.texts:
            anchor = "" if ha == "left" else f' text-anchor="{anchors[ha]}"'
            fill = "" if colour == "#000000" else f' fill="{colour}"'
            if rot:
                out.append(f'<text transform="translate({_f(x)} {_f(y)}) rotate(-90)" x="0" y="{_f(dv)}" '
                           f'font-size="{size}"{anchor}{fill}>{escape(s)}</text>\n')
            else:
                out.append(f'<text x="{_f(x)}" y="{_f(y + dv)}" font-size="{size}"{anchor}{fill}>'
                           f"{escape(s)}</text>\n")
        out.append("</g>\n")
        return out

    # ------------------------------------------------------------- PNG
    def png(self, *, compress_level: int = 6, dpi: float | None = None) -> bytes:
        """The drawing as PNG; ``dpi`` draws it at that resolution (the same physical size, ``DPI`` by default).

        The file records its resolution (pHYs), so a 300 dpi figure prints at its intended width.
        """
        from PIL import Image, ImageDraw

        k = 1.0 if dpi is None else float(dpi) / DPI
        width = self.width if dpi is None else max(1, round(self._print_width() * k))
        height = max(1, round(self.height * k))
        # supersampled shapes at screen resolution; at print resolution (>= 200 dpi a pixel is 0.13 mm or
        # less) the edges are drawn directly: the same look at half the cost (docs/report.md)
        ss = _SS if k < 200.0 / DPI else 1
        s = ss * k
        shapes, texts = self.flat()
        big = Image.new("RGB", (width * ss, height * ss), (255, 255, 255))
        draw = ImageDraw.Draw(big, "RGBA")
        for op in shapes:
            _png_shape(big, draw, op, s)
        img = big.reduce(ss) if ss > 1 else big
        for x, y, s_, size, colour, ha, dv, rot in texts:
            size_k = max(1, round(size * k)) if k != 1.0 else size
            x, y, dv = x * k, y * k, dv * k
            w = _width(s_, size_k)
            u0 = {"left": 0.0, "center": -w / 2, "right": -w}[ha]
            mask, ox, oy = _glyphs(s_, size_k, bool(rot))
            if rot:
                px, py = x + dv, y - u0
            else:
                px, py = x + u0, y + dv
            img.paste(_rgb(colour), (round(px + ox), round(py + oy)), mask)
        if not any(op[0] == "image" for op in shapes):
            # flat colours and their anti-aliased edges: 256 colours lose nothing visible
            # (max channel error ~14/255 on edge pixels), encode faster and weigh 2-3x less.
            # At print resolution the palette is found on a copy a third the size (the same flat
            # colours; a third of the quantising time, which was the largest part of a 300 dpi PNG)
            # and every pixel is mapped to it.
            big_image = ss == 1 and k > 1.5
            pal = (img.reduce(3) if big_image else img).quantize(256, method=Image.Quantize.FASTOCTREE)
            palette = pal.getpalette()  # the octree averages white with its neighbours: keep it white
            for j in range(0, len(palette) - 2, 3):
                if min(palette[j:j + 3]) >= 250:
                    palette[j:j + 3] = [255, 255, 255]
            pal.putpalette(palette)
            img = img.quantize(palette=pal, dither=Image.Dither.NONE) if big_image else pal
        buf = io.BytesIO()
        res = float(dpi) if dpi is not None else float(DPI)
        img.save(buf, format="PNG", compress_level=compress_level, dpi=(res, res))
        return buf.getvalue()

    # ------------------------------------------------------------- PDF
    def pdf(self) -> bytes:
        """The same drawing through matplotlib's PDF back end: vector, text as text.

        Fonts are embedded as TrueType (``pdf.fonttype`` 42), so the text stays
        selectable and editable in a journal's layout program (not Type 3 glyph
        procedures, not outlines).
        """
        import matplotlib

        buf = io.BytesIO()
        with matplotlib.rc_context({"pdf.fonttype": 42}):
            self.matplotlib_figure().savefig(buf, format="pdf", metadata={"CreationDate": None, "ModDate": None})
        return buf.getvalue()

    def matplotlib_figure(self):
        """The drawing replayed onto a matplotlib ``Figure`` (for PDF, or any format matplotlib writes)."""
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
        from matplotlib.patches import Polygon, Rectangle

        fig = Figure(figsize=(self.width / DPI, self.height / DPI), dpi=DPI)
        FigureCanvasAgg(fig)
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, self.width)
        ax.set_ylim(self.height, 0)
        ax.set_axis_off()
        shapes, texts = self.flat()
        for op in shapes:
            kind = op[0]
            if kind == "line":
                _, xs, ys, colour, lw, dash, alpha = op
                pattern = DASHES.get(dash)
                ls = (0, tuple(pattern)) if pattern else "-"
                ax.plot(xs, ys, color=colour, lw=lw / PT, ls=ls, alpha=alpha, solid_joinstyle="round")
            elif kind == "polygon":
                _, xs, ys, colour, alpha = op
                ax.add_patch(Polygon(np.column_stack([xs, ys]), closed=True, color=colour, alpha=alpha, lw=0))
            elif kind == "rect":
                _, x0, y0, x1, y1, fill, edge, lw, hatch, alpha = op
                if fill:
                    ax.add_patch(Rectangle((x0, y0), x1 - x0, y1 - y0, facecolor=fill, alpha=alpha, lw=0))
                for a, b, c, d in _hatch(x0, y0, x1, y1) if hatch else []:
                    ax.plot([a, c], [b, d], color=hatch, lw=1.0)
                if edge:
                    ax.add_patch(Rectangle((x0, y0), x1 - x0, y1 - y0, facecolor="none", edgecolor=edge,
                                           lw=lw / PT))
            elif kind == "segments":
                from matplotlib.collections import LineCollection

                _, a, colour, lw, alpha = op
                ax.add_collection(LineCollection(a.reshape(-1, 2, 2), colors=colour, linewidths=lw / PT,
                                                 alpha=alpha))
            elif kind == "markers":
                _, xs, ys, shape, size_pt, face, edge, alpha = op
                ax.plot(xs, ys, ls="none", marker=shape, ms=size_pt, color=face, mec=edge or face,
                        mew=0.8 if edge else 1.0, alpha=alpha)
            elif kind == "image":
                _, rgba, x0, y0, x1, y1 = op
                ax.imshow(rgba, extent=(x0, x1, y1, y0), interpolation="nearest", aspect="auto")
        ax.set_xlim(0, self.width)
        ax.set_ylim(self.height, 0)
        for x, y, s, size, colour, ha, dv, rot in texts:
            px, py = (x + dv, y) if rot else (x, y + dv)
            ax.text(px, py, s.replace("$", r"\$"), fontsize=size / PT, color=colour, ha=ha, va="baseline",
                    rotation=rot, rotation_mode="anchor")
        return fig


def _hatch(x0, y0, x1, y1, spacing=8.0):
    """45° hatch segments (rising to the right) covering a rectangle."""
    segs = []
    h = y1 - y0
    c = x0 - h
    while c < x1:  # the line from (c, y1) to (c + h, y0), clipped to [x0, x1]
        ta = max(0.0, (x0 - c) / h)
        tb = min(1.0, (x1 - c) / h)
        if tb > ta:
            segs.append((c + ta * h, y1 - ta * h, c + tb * h, y1 - tb * h))
        c += spacing
    return segs


def _resample(rgba, width: int, height: int) -> np.ndarray:
    """Nearest-neighbour resampling to at most ``width`` x ``height`` (never enlarges)."""
    h, w = rgba.shape[:2]
    if w <= width and h <= height:
        return rgba
    rows = np.minimum((np.arange(height) + 0.5) * h / height, h - 1).astype(int)
    cols = np.minimum((np.arange(width) + 0.5) * w / width, w - 1).astype(int)
    return rgba[rows][:, cols]


def _png_bytes(rgba) -> bytes:
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(rgba), "RGBA").save(buf, format="PNG", compress_level=6)
    return buf.getvalue()


def _svg_markers(xs, ys, shape, size_pt, face, edge, alpha) -> str:
    r = _radius(shape, size_pt, edge)
    starts = _coords(xs - r, ys).split(" ") if shape == "o" else None
    if shape == "o":  # a circle as two arcs from its left point
        arc = f"a{_f(r)} {_f(r)} 0 1 0 {_f(2 * r)} 0a{_f(r)} {_f(r)} 0 1 0 {_f(-2 * r)} 0z"
        parts = [f"M{a} {b}{arc}" for a, b in zip(starts[::2], starts[1::2])]
    elif shape == "x":
        a = _coords(xs - r, ys - r).split(" ")
        b = _coords(xs - r, ys + r).split(" ")
        d = _f(2 * r)
        parts = [f"M{a[2 * k]} {a[2 * k + 1]}l{d} {d}M{b[2 * k]} {b[2 * k + 1]}l{d} -{d}" for k in range(len(xs))]
        op = f' stroke-opacity="{alpha:.3g}"' if alpha < 1 else ""
        return f'<path d="{"".join(parts)}" fill="none" stroke="{face}" stroke-width="{PT:.2f}"{op}/>\n'
    else:
        parts = []
        for x, y in zip(xs.tolist(), ys.tolist()):
            pts = np.asarray(_marker_outline(shape, x, y, r))
            parts.append("M" + _coords(pts[:, 0], pts[:, 1]) + "z")
    op = f' fill-opacity="{alpha:.3g}"' if alpha < 1 else ""
    stroke = f' stroke="{edge}" stroke-width="{0.8 * PT:.2f}"' if edge else ' stroke="none"'
    return f'<path d="{"".join(parts)}" fill="{face}"{op}{stroke}/>\n'


def _shift(op, dx: float, dy: float):
    """A primitive moved by (dx, dy) pixels."""
    if dx == 0 and dy == 0:
        return op
    kind = op[0]
    if kind in ("line", "polygon", "markers"):
        return (kind, op[1] + dx, op[2] + dy, *op[3:])
    if kind in ("rect", "image"):
        if kind == "rect":
            return (kind, op[1] + dx, op[2] + dy, op[3] + dx, op[4] + dy, *op[5:])
        return (kind, op[1], op[2] + dx, op[3] + dy, op[4] + dx, op[5] + dy)
    if kind == "segments":
        return (kind, op[1] + np.array([dx, dy, dx, dy]), *op[2:])
    return op


def _png_shape(big, draw, op, s=_SS):
    kind = op[0]
    if kind == "line":
        _, xs, ys, colour, lw, dash, alpha = op
        fill = (*_rgb(colour), round(255 * alpha))
        width = max(1, round(lw * s))
        pattern = DASHES.get(dash)
        if pattern:
            unit = max(lw, 1.0) * s
            for piece in _dash(xs * s, ys * s, [p * unit for p in pattern]):
                draw.line([tuple(p) for p in piece], fill=fill, width=width)
        else:
            pts = list(zip((xs * s).tolist(), (ys * s).tolist()))
            draw.line(pts, fill=fill, width=width, joint="curve" if width > 2 and len(pts) > 2 else None)
    elif kind == "segments":
        _, a, colour, lw, alpha = op
        fill = (*_rgb(colour), round(255 * alpha))
        width = max(1, round(lw * s))
        for p, q, r, t in (a * s).tolist():
            draw.line([(p, q), (r, t)], fill=fill, width=width)
    elif kind == "polygon":
        _, xs, ys, colour, alpha = op
        draw.polygon(list(zip((xs * s).tolist(), (ys * s).tolist())), fill=(*_rgb(colour), round(255 * alpha)))
    elif kind == "rect":
        _, x0, y0, x1, y1, fill, edge, lw, hatch, alpha = op
        box = (x0 * s, y0 * s, x1 * s - 1, y1 * s - 1)
        if fill and alpha >= 1:  # opaque: a plain fill (the same pixels as draw.rectangle, which truncates
            # its corners to integers, without its per-pixel blending: ~20x faster on a tall event band)
            ix0, iy0 = max(0, int(box[0])), max(0, int(box[1]))
            ix1, iy1 = min(big.width, int(box[2]) + 1), min(big.height, int(box[3]) + 1)
            if ix1 > ix0 and iy1 > iy0:
                big.paste(_rgb(fill), (ix0, iy0, ix1, iy1))
        elif fill:
            draw.rectangle(box, fill=(*_rgb(fill), round(255 * alpha)))
        if hatch:
            for a, b, c, d in _hatch(x0, y0, x1, y1):
                draw.line([(a * s, b * s), (c * s, d * s)], fill=_rgb(hatch), width=max(1, round(s)))
        if edge:
            draw.rectangle(box, outline=_rgb(edge), width=max(1, round(lw * s)))
    elif kind == "markers":
        _, xs, ys, shape, size_pt, face, edge, alpha = op
        r = _radius(shape, size_pt, edge)
        fc = (*_rgb(face), round(255 * alpha))
        ec = (*_rgb(edge), round(255 * alpha)) if edge else None
        rr = r * s
        ew = max(1, round(0.8 * PT * s))
        for x, y in zip((xs * s).tolist(), (ys * s).tolist()):
            if shape == "o":
                draw.ellipse((x - rr, y - rr, x + rr, y + rr), fill=fc, outline=ec, width=ew if ec else 0)
            elif shape == "x":
                w = max(1, round(PT * s))
                draw.line([(x - rr, y - rr), (x + rr, y + rr)], fill=fc, width=w)
                draw.line([(x - rr, y + rr), (x + rr, y - rr)], fill=fc, width=w)
            else:
                draw.polygon(_marker_outline(shape, x, y, rr), fill=fc, outline=ec, width=ew if ec else 0)
    elif kind == "image":
        from PIL import Image

        _, rgba, x0, y0, x1, y1 = op
        bx0, by0 = round(x0 * s), round(y0 * s)
        bw, bh = max(1, round(x1 * s) - bx0), max(1, round(y1 * s) - by0)
        h, w = rgba.shape[:2]
        rows = np.minimum((np.arange(bh) + 0.5) * h / bh, h - 1).astype(int)
        cols = np.minimum((np.arange(bw) + 0.5) * w / bw, w - 1).astype(int)
        tile = Image.fromarray(np.ascontiguousarray(rgba[rows][:, cols]), "RGBA")
        big.paste(tile, (bx0, by0), tile)


# --------------------------------------------------------------------------- axes
class Axes:
    """A plot box on a canvas: data limits, mapping to pixels, and its frame.

    ``box`` is ``(left, top, right, bottom)`` in pixels. ``ylim`` may be given
    with ``inverted=True`` for images (row 0 at the top). ``xlog=True`` makes
    the x axis logarithmic (``xlim`` in data units, both > 0; values <= 0 map
    to NaN, which breaks a line), with decade ticks from :func:`log_ticks`.
    :meth:`set_ticks` replaces the ticks of an axis (e.g. one label per row).
    """

    def __init__(self, canvas: Canvas, box, xlim, ylim, *, inverted=False, xlog=False):
        self.canvas = canvas
        self.box = tuple(float(v) for v in box)
        self.xlim = (float(xlim[0]), float(xlim[1]))
        self.ylim = (float(ylim[0]), float(ylim[1]))
        self.inverted = inverted
        self.xlog = xlog
        self._custom = {}  # axis -> (values, labels, minor, size_pt)

    def x(self, v):
        x0, _, x1, _ = self.box
        lo, hi = self.xlim
        v = np.asarray(v, dtype=float)
        if self.xlog:
            lo, hi = math.log10(lo), math.log10(hi)
            with np.errstate(divide="ignore", invalid="ignore"):
                v = np.where(v > 0, np.log10(np.where(v > 0, v, 1.0)), np.nan)
        return x0 + (v - lo) * ((x1 - x0) / (hi - lo))

    def y(self, v):
        _, y0, _, y1 = self.box
        lo, hi = self.ylim
        f = (np.asarray(v, dtype=float) - lo) / (hi - lo)
        return y0 + f * (y1 - y0) if self.inverted else y1 - f * (y1 - y0)

    def set_ticks(self, axis: str, values, labels=None, *, minor=(), size_pt=8.0):
        """Fixed ticks for ``axis`` ("x" or "y"): values, their labels, unlabelled minor ticks, label size."""
        values = np.asarray(values, dtype=float)
        labels = list(labels) if labels is not None else tick_labels(values)
        self._custom[axis] = (values, labels, np.asarray(minor, dtype=float), size_pt)

    def _tick_count(self, axis: str) -> int:
        x0, y0, x1, y1 = self.box
        return max(3, min(8, int((x1 - x0) / 55))) if axis == "x" else max(3, min(8, int((y1 - y0) / 32)))

    def ticks(self, axis: str):
        if axis in self._custom:
            return self._custom[axis][0]
        lo, hi = self.xlim if axis == "x" else self.ylim
        if axis == "x" and self.xlog:
            return log_ticks(lo, hi, self._tick_count(axis))[0]
        return nice_ticks(lo, hi, self._tick_count(axis))

    def minor_ticks(self, axis: str):
        if axis in self._custom:
            return self._custom[axis][2]
        if axis == "x" and self.xlog:
            return log_ticks(*self.xlim, self._tick_count(axis))[1]
        return np.empty(0)

    def tick_text(self, axis: str) -> tuple[list[str], float]:
        """Labels of the major ticks of ``axis`` and their size in points."""
        if axis in self._custom:
            return self._custom[axis][1], self._custom[axis][3]
        t = self.ticks(axis)
        return (log_tick_labels(t) if axis == "x" and self.xlog else tick_labels(t)), 8.0

    def vspan(self, a, b, colour, *, alpha=1.0):
        """A full-height band between data x values ``a`` and ``b`` (clipped to the box)."""
        x0, y0, x1, y1 = self.box
        pa, pb = np.clip(self.x([a, b]), x0, x1)
        if np.isfinite([pa, pb]).all():
            self.canvas.rect(pa, y0, pb, y1, fill=colour, alpha=alpha)

    def grid(self, colour="#DDDDDD"):
        """Light grid lines at the ticks (draw before the data)."""
        x0, y0, x1, y1 = self.box
        for v in self.ticks("x"):
            px = float(self.x(v))
            self.canvas.line([px, px], [y0, y1], colour, 0.5)
        for v in self.ticks("y"):
            py = float(self.y(v))
            self.canvas.line([x0, x1], [py, py], colour, 0.5)

    def frame(self, *, xlabel, ylabel, title=None, colour="#000000"):
        """Left and bottom spines, ticks with labels, axis labels and a title above (draw after the data)."""
        c = self.canvas
        x0, y0, x1, y1 = self.box
        xt, yt = self.ticks("x"), self.ticks("y")
        (xl, xs), (yl, ys) = self.tick_text("x"), self.tick_text("y")
        tick = 3.5 * PT
        for v, s in zip(xt, xl):
            px = float(self.x(v))
            c.line([px, px], [y1, y1 + tick], colour, 0.8)
            c.text(px, y1 + tick + 3, s, xs, ha="center", va="top")
        for v, s in zip(yt, yl):
            py = float(self.y(v))
            c.line([x0 - tick, x0], [py, py], colour, 0.8)
            c.text(x0 - tick - 3, py, s, ys, ha="right", va="center")
        mx, my = self.x(self.minor_ticks("x")), self.y(self.minor_ticks("y"))
        if mx.size:
            c.segments(mx, y1, mx, y1 + 2.0 * PT, colour, 0.6)
        if my.size:
            c.segments(x0 - 2.0 * PT, my, x0, my, colour, 0.6)
        c.line([x0, x0, x1], [y0, y1, y1], colour, 0.8)
        c.text((x0 + x1) / 2, y1 + tick + 3 + xs * PT + 5, xlabel, 9, ha="center", va="top")
        yw = max((text_width(s, ys) for s in yl), default=0.0)
        c.text(x0 - tick - 3 - yw - 6, (y0 + y1) / 2, ylabel, 9, ha="center", va="bottom", rotation=90)
        if title:
            c.text(x0, y0 - 5, title, 9.5, va="bottom")

    def right_frame(self, ylim, *, ylabel, colour, spine=True):
        """A second y axis on the right (its own limits); returns the y mapping for it."""
        c = self.canvas
        x0, y0, x1, y1 = self.box
        twin = Axes(c, self.box, self.xlim, ylim)
        yt = twin.ticks("y")
        tick = 3.5 * PT
        for v, s in zip(yt, tick_labels(yt)):
            py = float(twin.y(v))
            c.line([x1, x1 + tick], [py, py], colour, 0.8)
            c.text(x1 + tick + 3, py, s, 8, colour=colour, va="center")
        if spine:
            c.line([x1, x1], [y0, y1], colour, 0.8)
        yw = max((text_width(s, 8) for s in tick_labels(yt)), default=0.0)
        c.text(x1 + tick + 3 + yw + 6, (y0 + y1) / 2, ylabel, 9, colour=colour, ha="center", va="top",
               rotation=90)
        return twin

    @staticmethod
    def left_margin(ylim, height_px) -> float:
        """Pixels needed left of a box for its y tick labels and y label."""
        n = max(3, min(8, int(height_px / 32)))
        labels = tick_labels(nice_ticks(float(ylim[0]), float(ylim[1]), n))
        return 3.5 * PT + 3 + max((text_width(s, 8) for s in labels), default=0.0) + 6 + 9 * PT + 4


def colour_bar(canvas: Canvas, box, lo: float, hi: float, cmap: str, *, label: str) -> None:
    """A vertical colour bar in ``box`` for values ``lo``..``hi``, ticks and ``label`` on its right."""
    x0, y0, x1, y1 = box
    strip, _, _ = colour_image(np.linspace(1.0, 0.0, 256)[:, None], cmap, 0.0, 1.0)
    canvas.image(strip, x0, y0, x1, y1)
    canvas.rect(x0, y0, x1, y1, edge="#000000")
    Axes(canvas, box, (0.0, 1.0), (lo, hi)).right_frame((lo, hi), ylabel=label, colour="#000000", spine=False)


def colour_bar_width(lo: float, hi: float, height_px: float) -> float:
    """Pixels a :func:`colour_bar` needs right of its strip."""
    return Axes.left_margin((lo, hi), height_px)


def autoscale(*arrays, margin=0.05):
    """Data limits over all finite values, widened by ``margin`` of the span on each side."""
    lo, hi = math.inf, -math.inf
    for a in arrays:
        if a is None:
            continue
        v = np.asarray(a, dtype=float)
        v = v[np.isfinite(v)]
        if v.size:
            lo, hi = min(lo, float(v.min())), max(hi, float(v.max()))
    if not math.isfinite(lo):
        return 0.0, 1.0
    if hi <= lo:
        pad = abs(lo) * 0.05 or 1.0
        return lo - pad, hi + pad
    span = hi - lo
    return lo - margin * span, hi + margin * span


def legend_columns(widths, col_gap, max_width, ncol=None) -> list[float]:
    """Widths of the legend's columns: the most columns (at most ``ncol``) whose entries, filled row by
    row, fit in ``max_width`` with ``col_gap`` between columns (one column when none fits)."""
    ncol = min(ncol or len(widths), len(widths))
    while ncol > 1:
        cols = [max(widths[k::ncol]) for k in range(ncol)]
        if sum(cols) + col_gap * (ncol - 1) <= max_width:
            return cols
        ncol -= 1
    return [max(widths)]


def legend(canvas: Canvas, entries, *, centre_x, top, max_width, size_pt=7.5, ncol=None, left=None) -> float:
    """Legend rows centred at ``centre_x`` (or starting at ``left``) below ``top``; returns the bottom in pixels.

    ``entries`` are ``(label, handle)``; a handle is a dict with optional keys
    ``line`` (colour, width_pt, dash), ``marker`` (shape, size_pt, face, edge),
    ``patch`` (colour, alpha), ``hatch`` (colour: a hatched swatch; with
    ``patch`` under it), ``caps`` (colour, width_pt: end bars of an error
    bar), ``bar`` (colour, width_pt: a vertical error bar through the marker)
    and ``tick`` (colour, width_pt: a short vertical stroke).
    """
    if not entries:
        return top
    size = _size(size_pt)
    handle_w = 2.0 * size
    gap = 0.8 * size
    col_gap = 2.0 * size
    widths = [handle_w + gap + text_width(label, size_pt) for label, _ in entries]
    n = len(entries)
    cols = legend_columns(widths, col_gap, max_width, ncol)
    ncol = len(cols)
    total = sum(cols) + col_gap * (ncol - 1)
    row_h = 1.45 * size
    left = centre_x - total / 2 if left is None else left
    for k, (label, h) in enumerate(entries):
        r, col = divmod(k, ncol)
        x = left + sum(cols[:col]) + col_gap * col
        y = top + r * row_h + row_h / 2
        if "patch" in h:
            colour, alpha = h["patch"]
            canvas.rect(x, y - 0.35 * size, x + handle_w, y + 0.35 * size, fill=colour, alpha=alpha)
        if "hatch" in h:
            canvas.rect(x, y - 0.35 * size, x + handle_w, y + 0.35 * size, hatch=h["hatch"], edge=h["hatch"],
                        width_pt=0.5)
        if "bar" in h:
            colour, lw = h["bar"]
            canvas.segments(x + handle_w / 2, y - 0.5 * size, x + handle_w / 2, y + 0.5 * size, colour, lw)
        if "line" in h:
            colour, lw, dash = h["line"]
            canvas.line([x, x + handle_w], [y, y], colour, lw, dash=dash)
        if "caps" in h:
            colour, lw = h["caps"]
            canvas.segments([x, x + handle_w], y - 0.3 * size, [x, x + handle_w], y + 0.3 * size, colour, lw)
        if "tick" in h:
            colour, lw = h["tick"]
            canvas.segments(x + handle_w / 2, y - 0.45 * size, x + handle_w / 2, y + 0.45 * size, colour, lw)
        if "marker" in h:
            shape, ms, face, edge = h["marker"]
            canvas.markers([x + handle_w / 2], [y], shape, ms, face, edge=edge)
        canvas.text(x + handle_w + gap, y, label, size_pt, va="center")
    return top + math.ceil(n / ncol) * row_h
