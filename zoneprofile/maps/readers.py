"""Reading element maps and images into one canonical form.

Every reader returns a :class:`MapImage`: a 2-D array indexed (row, col), the
channel name, the names of all channels in the file, and the pixel size in µm
when the file carries one. Large uncompressed TIFF and NPY files are
memory-mapped, not copied: nothing is read from disk until a pixel is used.

Readers live in an explicit registry (:data:`READERS`, file extension ->
function). A reader takes ``(path, channel)`` and returns ``MapImage``.
"""

from __future__ import annotations

import hashlib
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from zoneprofile._validation import InputError, require_file

__all__ = ["MapImage", "read_map", "READERS", "MAX_PIXELS", "file_sha256"]

#: Largest image accepted (pixels). 2**30 is a 32768 x 32768 map, far beyond any
#: microprobe map; anything larger is treated as a corrupt or hostile file.
MAX_PIXELS = 2**30
#: Largest side accepted (pixels).
MAX_SIDE = 65536
#: Smallest side accepted (pixels): below this no profile can be drawn.
MIN_SIDE = 3
#: Largest image decoded into memory (compressed TIFF); uncompressed files are memory-mapped.
MAX_DECODED_BYTES = 4 << 30


@dataclass
class MapImage:
    """A single-channel map and what is known about it.

    Attributes
    ----------
    data : ndarray (rows, cols)
        Signal per pixel (counts, counts per second or grey level); may be a
        read-only memory map.
    channel : str
        Name of this channel.
    channels : list of str
        All channels present in the file.
    pixel_um : float or None
        Pixel size from the file's resolution tags, if any.
    pixel_um_source : str
        Where ``pixel_um`` came from.
    path : Path
    integer_counts : bool
        True when the data type is an integer type (raw counts likely).
    notes : list of str
    """

    data: np.ndarray
    channel: str
    channels: list
    path: Path
    pixel_um: float | None = None
    pixel_um_source: str = "none"
    integer_counts: bool = False
    notes: list = field(default_factory=list)

    @property
    def shape(self):
        return self.data.shape


def file_sha256(path) -> str:
    """SHA-256 of a file, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _stem_tokens(path: Path) -> list[str]:
    stem = path.name.split(".")[0]
    return [t for t in re.split(r"[_\-\s.]+", stem) if t]


def _single_channel_name(path: Path) -> str:
    """Channel of a single-channel file: the last token of the file name (``ol3_Ca.tif`` -> ``Ca``)."""
    tokens = _stem_tokens(path)
    return tokens[-1] if tokens else path.stem


def _check_shape(shape, dtype, path: Path) -> None:
    if len(shape) < 2:
        message = f"expected a 2-D image, found {len(shape)} dimension(s)"
        raise InputError(message, path=path)
    rows, cols = int(shape[-2]), int(shape[-1])
    if rows > MAX_SIDE or cols > MAX_SIDE or rows * cols > MAX_PIXELS:
        message = (
            f"image of {rows} x {cols} pixels is larger than the {MAX_PIXELS:,} pixels accepted; "
            "refusing it as a corrupt or decompression-bomb file (crop or bin the map first)"
        )
        raise InputError(message, path=path)
    if rows < MIN_SIDE or cols < MIN_SIDE:
        message = f"image of {rows} x {cols} pixels is too small for a map (need at least {MIN_SIDE} x {MIN_SIDE})"
        raise InputError(message, path=path)
    dt = np.dtype(dtype)
    if dt.kind not in "uifb":
        message = f"unsupported pixel type {dt}; expected integer or floating-point values"
        raise InputError(message, path=path)


def _pick(names: list[str], channel, path: Path) -> int:
    """Index of ``channel`` among ``names`` (name, case-insensitive, or 1-based number)."""
    if channel is None:
        if len(names) == 1:
            return 0
        # calibrating whichever channel happens to come first would be a silent guess
        message = f"the file holds {len(names)} channels ({', '.join(names)}); choose one with --channel"
        raise InputError(message, path=path)
    key = str(channel).strip()
    lowered = [n.lower() for n in names]
    if key.lower() in lowered:
        return lowered.index(key.lower())
    if key.isdigit() and 1 <= int(key) <= len(names):
        return int(key) - 1
    message = f"channel '{key}' does not exist; channels in this file: {', '.join(names)}"
    raise InputError(message, path=path)


def _pick_single(path: Path, channel, extra_names=()) -> str:
    """Resolve ``channel`` for a single-channel file; accept any file-name token."""
    name = _single_channel_name(path)
    if channel is None:
        return name
    key = str(channel).strip().lower()
    accepted = {t.lower() for t in _stem_tokens(path)} | {path.stem.lower(), "1"}
    accepted |= {str(n).lower() for n in extra_names}
    if key not in accepted:
        message = f"channel '{channel}' does not exist; this file holds one channel, '{name}'"
        raise InputError(message, path=path)
    return str(channel).strip()


# --------------------------------------------------------------------------- TIFF

_TYPICAL_DPI = {72.0, 96.0, 150.0, 300.0, 600.0}


def _tiff_pixel_um(tif, page) -> tuple[float | None, str]:
    """Pixel size from ImageJ metadata or the TIFF resolution tags."""
    try:
        xres = page.tags.get("XResolution")
        yres = page.tags.get("YResolution")
        unit_tag = page.tags.get("ResolutionUnit")
        if xres is None:
            return None, "none"
        xv = xres.value[0] / xres.value[1] if xres.value[1] else 0.0
        yv = (yres.value[0] / yres.value[1] if yres.value[1] else 0.0) if yres is not None else xv
        if xv <= 0 or not np.isfinite(xv):
            return None, "none"
        ij = tif.imagej_metadata or {}
        ij_unit = str(ij.get("unit", "")).strip().lower().replace("\\u00b5", "µ")
        per_unit = {"micron": 1.0, "microns": 1.0, "um": 1.0, "µm": 1.0, "mm": 1000.0, "nm": 1e-3}
        if ij_unit in per_unit:
            size_x, size_y, source = per_unit[ij_unit] / xv, per_unit[ij_unit] / yv, "ImageJ calibration"
        else:
            unit = int(unit_tag.value) if unit_tag is not None else 2
            if unit == 3:
                size_x, size_y, source = 1e4 / xv, 1e4 / yv, "TIFF resolution tags (cm)"
            elif unit == 2 and round(xv, 6) not in _TYPICAL_DPI:
                size_x, size_y, source = 25400.0 / xv, 25400.0 / yv, "TIFF resolution tags (inch)"
            else:
                return None, "none"
        if abs(size_x - size_y) > 0.01 * size_x:
            return None, "none (pixels not square in the resolution tags)"
        return float(size_x), source
    except Exception:  # malformed tags: ignore them, the user gives --pixel-um
        return None, "none"


def _tiff_page_name(page, k: int) -> str:
    tag = page.tags.get("PageName")
    if tag is not None and str(tag.value).strip():
        return str(tag.value).strip()
    desc = page.tags.get("ImageDescription")
    if desc is not None:
        text = str(desc.value).strip()
        if 0 < len(text) <= 24 and "\n" not in text and "=" not in text and "{" not in text:
            return text
    return f"page{k + 1}"


def _read_tiff(path: Path, channel) -> MapImage:
    import tifffile

    size = path.stat().st_size
    try:
        tif = tifffile.TiffFile(path)
    except Exception:
        message = "not a readable TIFF file (damaged, truncated or another format)"
        raise InputError(message, path=path) from None
    with tif:
        try:
            pages = list(tif.pages)
        except Exception:
            message = "TIFF file is damaged or truncated (its page list cannot be read)"
            raise InputError(message, path=path) from None
        if not pages:
            raise InputError("TIFF file holds no image", path=path)
        for page in pages:
            shape = page.shape if page.planarconfig == 2 or page.samplesperpixel == 1 else page.shape[:2]
            _check_shape(shape, page.dtype, path)
            offsets, counts = page.dataoffsets, page.databytecounts
            if any(o + c > size for o, c in zip(offsets, counts)) or not offsets:
                message = "TIFF file is truncated: its image data run past the end of the file"
                raise InputError(message, path=path)
        first = pages[0]
        shape = first.shape
        # one page holding several samples (RGB, or channels stacked in one page)
        if len(pages) == 1 and len(shape) == 3:
            if first.planarconfig == 1 or shape[-1] in (3, 4):
                n = shape[-1]
                names = ["red", "green", "blue", "alpha"][:n] if n in (3, 4) else [f"band{i + 1}" for i in range(n)]
                k = _pick(names, channel, path)
                data = _tiff_asarray(first, path)[..., k]
            else:
                n = shape[0]
                names = [f"band{i + 1}" for i in range(n)]
                k = _pick(names, channel, path)
                data = _tiff_asarray(first, path)[k]
            pixel_um, source = _tiff_pixel_um(tif, first)
            return MapImage(data, names[k], names, path, pixel_um, source, data.dtype.kind in "ui")
        if len(pages) == 1:
            name = _pick_single(path, channel, extra_names=[_tiff_page_name(first, 0)])
            names = [name]
            page = first
        else:
            names = [_tiff_page_name(p, k) for k, p in enumerate(pages)]
            k = _pick(names, channel, path)
            page, name = pages[k], names[k]
            if len(page.shape) != 2:
                message = f"channel '{name}' is not a 2-D single-band page (shape {page.shape})"
                raise InputError(message, path=path)
        pixel_um, source = _tiff_pixel_um(tif, page)
        data = None
        if page.is_contiguous and page.compression == 1 and page.predictor in (1, None) and page.fillorder == 1:
            # tifffile reports the pixel type in native order; the bytes on disk are in the
            # file's order ('II' little-, 'MM' big-endian), so the memory map must say so
            on_disk = page.dtype.newbyteorder(tif.byteorder)
            offset = page.dataoffsets[0]
            if offset % page.dtype.itemsize == 0:
                data = np.memmap(path, dtype=on_disk, mode="r", offset=offset, shape=page.shape, order="C")
        if data is None:
            data = _tiff_asarray(page, path)
        return MapImage(data, name, names, path, pixel_um, source, data.dtype.kind in "ui")


def _tiff_asarray(page, path: Path) -> np.ndarray:
    need = int(np.prod(page.shape)) * page.dtype.itemsize
    if need > MAX_DECODED_BYTES:
        message = (
            f"decoding this compressed TIFF page would need {need / 2**30:.1f} GiB of memory; "
            "save the map uncompressed (it is then memory-mapped) or crop it"
        )
        raise InputError(message, path=path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            return np.asarray(page.asarray())
    except Exception as exc:
        message = f"cannot decode the TIFF image data ({type(exc).__name__}); the file may be damaged"
        raise InputError(message, path=path) from None


# --------------------------------------------------------------------------- PNG


def _read_png(path: Path, channel) -> MapImage:
    from PIL import Image

    saved_limit = Image.MAX_IMAGE_PIXELS
    try:
        # Pillow's decompression-bomb limit set to ours for this read only
        Image.MAX_IMAGE_PIXELS = MAX_PIXELS // 2
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            with Image.open(path) as opened:
                rows, cols = opened.size[1], opened.size[0]
                _check_shape((rows, cols), np.uint8, path)
                opened.load()
                img = opened.copy()
    except InputError:
        raise
    except (Image.DecompressionBombError, Image.DecompressionBombWarning):
        message = (
            f"image is larger than the {MAX_PIXELS // 2:,} pixels accepted for PNG/JPEG (oversized, or a "
            "decompression bomb); crop or bin it, or save it as TIFF"
        )
        raise InputError(message, path=path) from None
    except Exception:
        message = "not a readable PNG/JPEG image (damaged, truncated or another format)"
        raise InputError(message, path=path) from None
    finally:
        Image.MAX_IMAGE_PIXELS = saved_limit
    mode = img.mode
    if mode in ("L", "I", "I;16", "I;16B", "F", "1", "P", "LA"):
        if mode == "P":
            img = img.convert("L")
        if mode == "LA":
            img = img.getchannel(0)
        arr = np.asarray(img)
        name = _pick_single(path, channel)
        names = [name]
    else:
        arr = np.asarray(img.convert("RGBA" if "A" in mode else "RGB"))
        if np.array_equal(arr[..., 0], arr[..., 1]) and np.array_equal(arr[..., 1], arr[..., 2]):
            name = _pick_single(path, channel, extra_names=["grey", "gray"])
            arr, names = arr[..., 0], [name]
        else:
            names = ["red", "green", "blue", "alpha"][: arr.shape[-1]]
            k = _pick(names, channel, path)
            arr, name = arr[..., k], names[k]
    if arr.dtype == bool:
        arr = arr.astype(np.uint8)
    return MapImage(np.ascontiguousarray(arr), name, names, path, None, "none", arr.dtype.kind in "ui")


# --------------------------------------------------------------------------- NPY


def _read_npy(path: Path, channel) -> MapImage:
    try:
        with open(path, "rb") as fh:
            version = np.lib.format.read_magic(fh)
            reader = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
            shape, _fortran, dtype = reader(fh, max_header_size=100000)
    except Exception:
        message = "not a readable NumPy .npy file (damaged, truncated or another format)"
        raise InputError(message, path=path) from None
    if dtype.hasobject:
        raise InputError("NumPy file holds Python objects; only numeric arrays are read", path=path)
    _check_shape(shape, dtype, path)
    try:
        arr = np.load(path, mmap_mode="r", allow_pickle=False)
    except Exception:
        message = "NumPy file is damaged or truncated"
        raise InputError(message, path=path) from None
    if arr.ndim == 2:
        name = _pick_single(path, channel)
        return MapImage(arr, name, [name], path, None, "none", arr.dtype.kind in "ui")
    if arr.ndim == 3:
        names = [f"band{i + 1}" for i in range(arr.shape[0])]
        k = _pick(names, channel, path)
        return MapImage(arr[k], names[k], names, path, None, "none", arr.dtype.kind in "ui")
    message = f"NumPy array has {arr.ndim} dimensions; expected (rows, cols) or (channels, rows, cols)"
    raise InputError(message, path=path)


# --------------------------------------------------------------------------- text matrix

_MAX_TEXT_BYTES = 2 << 30


def _matrix_number(cell: str) -> float:
    """``float`` without its underscores (``7_0`` is 70 to Python, a typo in a count matrix)."""
    if "_" in cell:
        raise ValueError(cell)
    return float(cell)


def _read_text(path: Path, channel) -> MapImage:
    """A count matrix as text: one image row per line, comma, tab, semicolon or spaces between values."""
    if path.stat().st_size > _MAX_TEXT_BYTES:
        raise InputError("text matrix larger than 2 GiB; save the map as TIFF or NPY", path=path)
    raw = path.read_bytes()
    if b"\x00" in raw[:4096]:
        message = "looks like a binary file, expected a text matrix of numbers"
        raise InputError(message, path=path)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    lines = text.splitlines()
    first = next((ln for ln in lines if ln.strip()), "")
    if "\t" in first:
        splitter = lambda s: s.split("\t")  # noqa: E731
    elif ";" in first:
        splitter = lambda s: s.replace(",", ".").split(";")  # noqa: E731 - decimal commas
    elif "," in first:
        splitter = lambda s: s.split(",")  # noqa: E731
    else:
        splitter = lambda s: s.split()  # noqa: E731
    rows, line_no = [], []
    header_skipped = False
    for i, ln in enumerate(lines, start=1):
        if not ln.strip() or ln.lstrip().startswith("#"):
            continue
        cells = [c.strip() for c in splitter(ln.strip())]
        if cells and cells[-1] == "":  # trailing delimiter
            cells = cells[:-1]
        try:
            values = [_matrix_number(c) for c in cells]
        except ValueError:
            if not rows and not header_skipped:  # a header line of names
                header_skipped = True
                continue
            for j, c in enumerate(cells, start=1):
                try:
                    _matrix_number(c)
                except ValueError:
                    raise InputError("not a number", path=path, row=i, column=str(j), text=c) from None
        if rows and len(values) != len(rows[0]):
            message = f"row holds {len(values)} values, the first row holds {len(rows[0])}"
            raise InputError(message, path=path, row=i)
        bad = [j for j, v in enumerate(values, start=1) if not np.isfinite(v)]
        if bad:
            raise InputError("not a finite number", path=path, row=i, column=str(bad[0]), text=cells[bad[0] - 1])
        rows.append(values)
        line_no.append(i)
    if not rows:
        raise InputError("no numbers found; expected a matrix of counts, one image row per line", path=path)
    arr = np.asarray(rows, dtype=np.float64)
    _check_shape(arr.shape, arr.dtype, path)
    integer = bool(np.all(arr == np.round(arr)))
    name = _pick_single(path, channel)
    return MapImage(arr.astype(np.float32) if arr.size > 1_000_000 else arr, name, [name], path, None, "none", integer)


#: Registry: file extension -> reader(path, channel) -> MapImage.
READERS = {
    ".tif": _read_tiff,
    ".tiff": _read_tiff,
    ".png": _read_png,
    ".jpg": _read_png,
    ".jpeg": _read_png,
    ".npy": _read_npy,
    ".csv": _read_text,
    ".tsv": _read_text,
    ".txt": _read_text,
    ".asc": _read_text,
    ".dat": _read_text,
}

_MAGIC = {b"II*\x00": ".tif", b"MM\x00*": ".tif", b"II+\x00": ".tif", b"MM\x00+": ".tif",
          b"\x89PNG": ".png", b"\x93NUM": ".npy"}


def read_map(path, *, channel=None) -> MapImage:
    """Read one channel of an element map or image.

    Parameters
    ----------
    path : path-like
        TIFF (single- or multi-page; 8/16/32-bit integer or float), PNG, NPY
        (2-D, or 3-D as channels x rows x cols) or a text matrix (CSV, TSV,
        semicolon- or space-separated; one image row per line).
    channel : str, optional
        Channel name (case-insensitive) or 1-based page number. Single-channel
        files are named by their file name's last token (``ol3_Ca.tif`` holds
        ``Ca``); multi-page TIFFs by their PageName tag or short description.

    Returns
    -------
    MapImage

    Raises
    ------
    InputError
        Not an image, damaged or truncated, absurd dimensions, unknown channel.
    """
    p = require_file(path, what="map image")
    with open(p, "rb") as fh:
        head = fh.read(8)
    kind = next((ext for magic, ext in _MAGIC.items() if head.startswith(magic)), None)
    ext = p.suffix.lower()
    if kind is None:
        if ext in (".tif", ".tiff", ".png", ".npy"):
            kind_name = {".tif": "TIFF", ".tiff": "TIFF", ".png": "PNG", ".npy": "NumPy .npy"}[ext]
            message = f"not a {kind_name} image (the file does not start like one)"
            raise InputError(message, path=p)
        if ext in (".jpg", ".jpeg"):
            kind = ext
        elif ext in READERS:
            kind = ext
        else:
            message = "not an image: expected TIFF, PNG, NPY or a text matrix (.csv/.tsv/.txt)"
            raise InputError(message, path=p)
    image = READERS[kind](p, channel)
    if image.data.ndim != 2:
        message = f"expected a 2-D image, found shape {image.data.shape}"
        raise InputError(message, path=p)
    return image

