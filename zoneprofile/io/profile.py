"""Reading a composition profile: a ``recalc`` output or any table with ``distance_um``.

A profile table has one row per point, a ``distance_um`` column measured from the
rim (0 at the rim, increasing toward the core) and value columns such as ``An``,
``Fo``, ``Mg_ppm``. Optional columns: ``point`` (label), ``qc`` (``ok`` or the
reasons a point was flagged), ``<column>_sd`` (per-point 1-sigma precision).
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np
import pandas as pd

from zoneprofile._limits import LIMITS
from zoneprofile._validation import InputError, require_file
from zoneprofile.io.cells import parse_number

__all__ = ["read_profile", "read_text_table"]

_ENCODINGS = ("utf-8-sig", "cp1252", "latin-1")


def _decode(path: Path) -> str:
    raw = path.read_bytes()
    if b"\x00" in raw[:4096]:
        message = "looks like a binary file, expected a text table (CSV/TSV) or .xlsx"
        raise InputError(message, path=path)
    for enc in _ENCODINGS:
        try:
            return raw.decode(enc)
        except UnicodeDecodeError:
            continue
    message = "cannot decode the file as text"  # pragma: no cover - latin-1 decodes anything
    raise InputError(message, path=path)


def _sniff_delimiter(lines: list[str]) -> str:
    sample = [ln for ln in lines if ln.strip()][:20]
    best, best_score = ",", -1
    for delim in ("\t", ";", ","):
        counts = [ln.count(delim) for ln in sample]
        if not counts or max(counts) == 0:
            continue
        # a delimiter that splits most lines into the same number of fields wins
        common = max(set(counts), key=counts.count)
        score = counts.count(common) * 100 + common
        if common > 0 and score > best_score:
            best, best_score = delim, score
    return best


def read_text_table(path, *, header_contains=None) -> tuple[pd.DataFrame, int]:
    """Read a delimited text table (or an .xlsx sheet) as strings.

    Parameters
    ----------
    path : path-like
        CSV, TSV, semicolon-separated (decimal commas allowed with ``;`` or
        tabs), whitespace-aligned text, UTF-8 or UTF-16, or .xlsx.
    header_contains : iterable of str, optional
        Lower-case names, one of which must appear in the header row; lines above
        it (titles) are skipped. Default: the first non-empty line is the header.

    Returns
    -------
    frame : DataFrame of str
        Cells as stripped strings ('' for blank); a ``_row`` column holds each
        row's 1-based line number in the file.
    header_line : int
        1-based line number of the header.

    Raises
    ------
    InputError
        As :func:`zoneprofile.io.tables.read_raw_table`; also a data row with
        more cells than the header and an unclosed quote, naming the row.
    """
    from zoneprofile.io import tables

    p = require_file(path)
    wanted = None if header_contains is None else {str(w).strip().lower() for w in header_contains}

    def is_header(row):
        cells = {c.strip().lower() for c in row if c.strip()}
        if not cells:
            return 0
        return 1 if wanted is None else len(wanted & cells)

    return tables._sheet_frame(p, None, is_header, wanted)


def _read_any(path: Path, sheet, header_contains) -> pd.DataFrame:
    from zoneprofile.io import tables

    return tables.read_sheet_as_text(path, sheet=sheet, header_contains=header_contains)


def _to_float(frame: pd.DataFrame, column: str, path: Path, *, allow_blank: bool,
              censored: np.ndarray | None = None) -> np.ndarray:
    """Numbers of one column; with ``censored`` (a bool array), below-detection
    marks (``<0.01``, ``bdl``, ``n.d.``, ... as :func:`zoneprofile.io.cells.parse_cell`
    reads them) become NaN and are marked True there instead of stopping the read."""
    out = np.empty(len(frame))
    for k, (cell, row) in enumerate(zip(frame[column], frame["_row"])):
        s = "" if cell is None else str(cell).strip()
        if s == "" or s.lower() == "nan":
            if allow_blank:
                out[k] = np.nan
                continue
            raise InputError("empty cell where a number is needed", path=path, row=int(row), column=column)
        x = parse_number(s)
        if x is None and censored is not None:
            from zoneprofile.io.cells import parse_cell

            if parse_cell(s).state == "censored":
                out[k] = np.nan
                censored[k] = True
                continue
        if x is None:
            raise InputError("not a number", path=path, row=int(row), column=column, text=s)
        if not np.isfinite(x) or abs(x) > 1e12:
            raise InputError("not a finite, plausible number", path=path, row=int(row), column=column, text=s)
        out[k] = x
    return out


def read_profile(
    path,
    *,
    columns=("An",),
    optional=(),
    include_flagged: bool = False,
    sheet=None,
    allow_blank=(),
    allow_censored=(),
) -> pd.DataFrame:
    """Read a profile table and check it.

    Parameters
    ----------
    path : path-like
        CSV/TSV/semicolon text or .xlsx with a ``distance_um`` column.
    columns : sequence of str
        Value columns that must be present and numeric in every kept row.
    optional : sequence of str
        Value columns read when present (numeric, blanks become NaN). A
        ``<col>_sd`` is not read where its ``allow_blank``/``allow_censored``
        value ``<col>`` is blank or below detection, another optional column
        not where every such value of the row is (the caller leaves those
        values out).
    include_flagged : bool
        Keep points whose ``qc`` is not ``ok`` (default: leave them out).
    allow_blank : sequence of str
        Required columns in which blank cells are allowed (become NaN).
    allow_censored : sequence of str
        Required columns in which below-detection marks (``<0.01``, ``bdl``,
        ``b.d.l.``, ``n.d.``, ``<LOD``) are allowed: they become NaN and a bool
        column ``<col>_censored`` marks them, so the caller can count them.

    Returns
    -------
    DataFrame
        ``distance_um``, the value columns as float, ``point`` and ``qc`` as
        text and ``_row`` (line number in the file), sorted as in the file.

    Raises
    ------
    InputError
        Missing file or column, a non-numeric cell (row, column and text named),
        unsorted or duplicated distances, fewer than two points.
    """
    p = require_file(path, what="profile table")
    frame = _read_any(p, sheet, header_contains=("distance_um",))
    names = {c.strip(): c for c in frame.columns}
    if "distance_um" not in names:
        message = "no 'distance_um' column; give a recalc output or a table with distance from the rim in µm"
        raise InputError(message, path=p)
    for col in columns:
        if col not in names:
            have = ", ".join(c for c in frame.columns if c != "_row")
            message = f"no '{col}' column (columns present: {have})"
            raise InputError(message, path=p)
    if "qc" in names and not include_flagged:
        keep = frame[names["qc"]].astype(str).str.strip().str.lower().isin(["ok", ""])
        frame = frame[keep.to_numpy()].reset_index(drop=True)
    if len(frame) == 0:
        message = "no usable points (all rows empty or flagged by QC)"
        raise InputError(message, path=p)
    out = pd.DataFrame({"_row": frame["_row"].astype(int).to_numpy()})
    out["distance_um"] = _to_float(frame, names["distance_um"], p, allow_blank=False)
    for col in columns:
        mask = np.zeros(len(frame), bool) if col in allow_censored else None
        out[col] = _to_float(frame, names[col], p, allow_blank=col in allow_blank, censored=mask)
        if mask is not None:
            out[f"{col}_censored"] = mask
    # a value below detection or blank is left out by the caller, so the cells that only serve it are not
    # read: its own "<value>_sd" where the value is missing, any other optional cell (An) where every such
    # value of the row is missing ("<0.01" beside "bdl" must not stop the table)
    missing = {col: ~np.isfinite(out[col].to_numpy(float))
               for col in dict.fromkeys([*allow_censored, *allow_blank]) if col in out}
    row_unused = np.logical_and.reduce(list(missing.values())) if missing else np.zeros(len(frame), bool)
    for col in optional:
        if col in names and col not in out:
            serves = col[:-3] if col.endswith("_sd") else None
            skip = missing[serves] if serves in missing else row_unused
            values = np.full(len(frame), np.nan)
            kept = ~skip
            if kept.any():
                values[kept] = _to_float(frame[kept], names[col], p, allow_blank=True)
            out[col] = values
    out["point"] = frame[names["point"]].astype(str).to_numpy() if "point" in names else [
        str(r) for r in out["_row"]
    ]
    out["qc"] = frame[names["qc"]].astype(str).to_numpy() if "qc" in names else "ok"
    d = out["distance_um"].to_numpy()
    far = np.flatnonzero(np.abs(d) > LIMITS["distance_um"].high)
    if far.size:
        k = int(far[0])
        message = (
            f"distance {d[k]:g} µm is beyond {LIMITS['distance_um'].high:g} µm (10 cm), longer than any crystal "
            "traverse; check the units of the column (µm expected)"
        )
        raise InputError(message, path=p, row=int(out["_row"][k]), column="distance_um")
    if len(d) and d[0] < 0:
        message = (
            f"distance_um is measured from the rim (0) toward the core, but the first point is at {d[0]:g} µm; "
            f"re-zero the column (subtract {d[0]:g}) or give the recalc output"
        )
        raise InputError(message, path=p, row=int(out["_row"][0]), column="distance_um")
    if len(d) >= 2:
        diffs = np.diff(d)
        if np.any(diffs == 0):
            k = int(np.flatnonzero(diffs == 0)[0]) + 1
            message = f"duplicated distance {d[k]:g} µm; each point needs its own position"
            raise InputError(message, path=p, row=int(out["_row"][k]), column="distance_um")
        if np.any(diffs < 0):
            k = int(np.flatnonzero(diffs < 0)[0]) + 1
            message = (
                f"distances must increase from the rim down the table; {d[k]:g} µm follows {d[k - 1]:g} µm "
                "(sort the table or use 'zoneprofile recalc' to put the rim first)"
            )
            raise InputError(message, path=p, row=int(out["_row"][k]), column="distance_um")
    return out
