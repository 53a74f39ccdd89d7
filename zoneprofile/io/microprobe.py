"""Reading a table of spot analyses (microprobe or LA-ICP-MS) into canonical columns.

No chemistry here: the reader finds the header below any title lines, skips a
unit row, maps column names to canonical oxides / trace elements / stage
coordinates / labels, parses every cell into number, censored or missing,
and refuses what cannot be read with the file, row, column and text named.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError
from zoneprofile.io.cells import parse_cell
from zoneprofile.io.columns import UNIT_TOKENS, Column, classify_header, header_score
from zoneprofile.io.tables import frame_below_header, header_cells, read_raw_table
from zoneprofile.minerals.atomic import OXIDES

__all__ = ["Analyses", "read_analyses"]

_SUMMARY_LABELS = {
    "average", "mean", "avg", "avg.", "stdev", "std dev", "std. dev.", "st.dev.", "sd", "s.d.", "minimum",
    "maximum", "min", "max", "median", "std", "1 sigma", "2 sigma", "sum", "total", "count", "n",
}
#: A plain non-negative decimal number (the fast path of cell parsing; anything
#: else goes through :func:`parse_cell`, which gives the same value for these).
_PLAIN_NUMBER = re.compile(r"\d+(\.\d*)?\Z").match
MAX_OXIDE_WT = 100.0
MAX_PPM = 1.0e6
MAX_COORD = 1.0e7


@dataclass
class Analyses:
    """Spot analyses read from one table, before any chemistry.

    ``data`` holds ``_row`` (line/spreadsheet row), ``point`` (label), optional
    ``comment``/``sample``/``crystal``, oxide wt% (NaN where censored or
    missing), ``<El>_ppm`` (NaN where censored or missing), ``x``/``y``/
    ``distance`` in the file's units and ``total_reported``. ``state`` maps each
    oxide and trace column to an array of ``number``/``censored``/``missing``;
    ``limit`` to the detection limits given in censored cells (NaN if none);
    ``detection_limit`` to the limits of detection-limit columns, converted to
    oxide wt% (element wt% x M(oxide)/(n M(element)), REFERENCES §2).
    """

    data: pd.DataFrame
    state: dict[str, np.ndarray]
    limit: dict[str, np.ndarray]
    text: dict[str, np.ndarray]
    columns: dict[str, str]  # canonical name -> name in the file
    units: dict[str, str | None]
    path: Path
    header_row: int
    sheet: str | None = None
    delimiter: str | None = None
    decimal_comma: bool = False
    ignored: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    detection_limit: dict[str, np.ndarray] = field(default_factory=dict)  # oxide -> limit in oxide wt%

    @property
    def oxides(self) -> list[str]:
        return [o for o in OXIDES if o in self.data.columns]

    @property
    def traces(self) -> list[str]:
        return [c for c in self.data.columns if c.endswith("_ppm")]


def _find_header(table) -> int:
    best = None
    for i, row in enumerate(table.rows):
        score = header_score(row)
        if score >= 2:
            return i
        if score == 1 and best is None:
            best = i
    if best is not None:
        return best
    where = f" in sheet '{table.sheet}'" if table.sheet else ""
    message = (
        f"no header row with oxide columns found{where}; expected a row naming oxides such as "
        "SiO2, Al2O3, CaO, Na2O (check the file and --sheet)"
    )
    raise InputError(message, path=table.path)


def _unit_of(cell: str) -> str | None:
    s = cell.strip().lower().strip("()[]{} ").replace(" ", "")
    return UNIT_TOKENS.get(s)


def _is_unit_row(cells: list[str]) -> bool:
    filled = [c for c in cells if c.strip()]
    return bool(filled) and all(_unit_of(c) is not None or parse_cell(c).state == "bad" for c in filled) and any(
        _unit_of(c) is not None for c in filled
    )


def _canonical_names(cols: list[Column], path: Path, header_row: int) -> dict[int, str]:
    """Output name of each used column; duplicates refused, isotopes kept apart."""
    names: dict[int, str] = {}
    taken: dict[str, tuple[str, int]] = {}
    singles = {"x": "x", "y": "y", "distance": "distance", "total": "total_reported"}
    for j, c in enumerate(cols):
        if c.kind == "oxide":
            out = c.canonical
        elif c.kind in singles:
            out = singles[c.kind]
        elif c.kind == "trace":
            out = f"{c.canonical}_ppm"
            if out in taken and c.mass is not None:
                out = f"{c.canonical}{c.mass}_ppm"
        elif c.kind in ("point", "comment", "sample", "crystal"):
            out = c.kind
            if out in taken:
                continue  # a second label-like column is not needed
        else:
            continue
        if out in taken:
            first_name, first_j = taken[out]
            message = (
                f"columns '{first_name}' (column {first_j + 1}) and '{c.name}' (column {j + 1}) both give {out}; "
                "remove or rename one (duplicate columns)"
            )
            raise InputError(message, path=path, row=header_row, column=c.name)
        taken[out] = (c.name, j)
        names[j] = out
    return names


def read_analyses(path, *, sheet=None) -> Analyses:
    """Read a table of spot analyses.

    Parameters
    ----------
    path : path-like
        CSV, TSV, semicolon-separated (decimal commas), whitespace-aligned
        text, or .xlsx.
    sheet : str, optional
        Workbook sheet; default the first sheet holding oxide columns.

    Returns
    -------
    Analyses

    Raises
    ------
    InputError
        Empty, binary or damaged file; no header; header without data; a
        duplicated column; a cell that is not a number (row, column, text);
        an impossible value (an oxide above 100 wt%, a negative total).
    """
    table = read_raw_table(path, sheet=sheet, is_header=header_score)
    p = table.path
    h = _find_header(table)
    header_row = table.lines[h]
    if not table.ends_cleanly:
        last = max((i for i, r in enumerate(table.rows) if any(c.strip() for c in r)), default=h)
        width = len([c for c in table.rows[h] if c.strip()])
        if last > h and len(table.rows[last]) < width:
            message = (
                f"the last line has {len(table.rows[last])} of {width} cells and no line break: "
                "the file looks truncated; export it again"
            )
            raise InputError(message, path=p, row=table.lines[last])
    raw_header = header_cells(table, h)
    cols = classify_header(raw_header)
    names = _canonical_names(cols, p, header_row)
    frame = frame_below_header(table, h, dedupe=True)
    header = [c for c in frame.columns if c != "_row"]  # same order as raw_header
    notes: list[str] = []
    units = {"x": None, "y": None, "distance": None}
    for j, c in enumerate(cols):
        if names.get(j) in units and c.unit in ("um", "mm"):
            units[names[j]] = c.unit
    trace_units = {j: (c.unit or "ppm") for j, c in enumerate(cols) if c.kind == "trace"}

    # a unit row right below the header
    if len(frame):
        first = [str(v) for v in frame[header].iloc[0].tolist()]
        if _is_unit_row(first):
            for j, cell in enumerate(first):
                u = _unit_of(cell)
                if u and names.get(j) in units and u in ("um", "mm"):
                    units[names[j]] = u
                if u and j in trace_units:
                    trace_units[j] = u
            notes.append(f"row {int(frame['_row'].iloc[0])} read as a unit row")
            frame = frame.iloc[1:].reset_index(drop=True)

    # summary rows (Average, StDev, ...), comment lines, footers and repeated
    # headers are not analyses: skipped, and every skipped row is counted
    keep, reasons = _skip_non_analyses(frame, header, names, notes)
    n_below = len(frame)
    frame = frame[keep].reset_index(drop=True)
    if len(frame) == 0:
        message = "the header has no data rows below it"
        raise InputError(message, path=p, row=header_row)
    if reasons:
        counts: dict[str, int] = {}
        for why in reasons.values():
            counts[why] = counts.get(why, 0) + 1
        detail = ", ".join(f"{v} {k}" for k, v in counts.items())
        notes.append(f"skipped {len(reasons)} of {n_below} rows below the header ({detail})")
        _refuse_lost_rows(reasons, frame["_row"].to_numpy(dtype=int), p)

    rows = frame["_row"].to_numpy(dtype=int)
    data = pd.DataFrame({"_row": rows})
    state: dict[str, np.ndarray] = {}
    limit: dict[str, np.ndarray] = {}
    texts: dict[str, np.ndarray] = {}
    columns: dict[str, str] = {}
    for j, out in names.items():
        src = header[j]
        columns[out] = src
        cells = frame[src].astype(object).to_numpy()
        if out in ("point", "comment", "sample", "crystal"):
            data[out] = [str(c).strip() for c in cells]
            continue
        values = np.full(len(cells), np.nan)
        st = np.empty(len(cells), dtype=object)
        lim = np.full(len(cells), np.nan)
        tx = np.empty(len(cells), dtype=object)
        for k, text in enumerate(cells):
            if type(text) is str and _PLAIN_NUMBER(text):  # the bulk of a table: a plain non-negative number
                values[k], st[k], tx[k] = float(text), "number", text
                continue
            cell = parse_cell(text)
            tx[k] = cell.text
            if cell.state == "bad":
                if math.isinf(cell.value):
                    message = "impossible value (not finite)"
                else:
                    message = "not a number, and not a below-detection mark such as '<0.03', 'bdl' or '-'"
                raise InputError(message, path=p, row=int(rows[k]), column=src, text=cell.text)
            st[k] = cell.state
            if cell.limit is not None:
                lim[k] = cell.limit
            if cell.state == "number":
                values[k] = cell.value
            elif cell.state == "censored" and out in ("x", "y", "distance"):
                if cell.value < 0 and math.isfinite(cell.value):  # negative coordinates are fine
                    values[k], st[k] = cell.value, "number"
                else:
                    message = "a position is needed here"
                    raise InputError(message, path=p, row=int(rows[k]), column=src, text=cell.text)
            elif cell.state == "censored" and out == "total_reported" and cell.value < 0:
                message = "impossible value: a negative oxide total"
                raise InputError(message, path=p, row=int(rows[k]), column=src, text=cell.text)
        _check_magnitudes(out, values, rows, p, src, cells)
        if out.endswith("_ppm") and trace_units.get(j) == "wt%":
            values = values * 1.0e4
            notes.append(f"column '{src}' read as element wt% and converted to ppm")
        data[out] = values
        if out in OXIDES or out.endswith("_ppm"):
            state[out], limit[out], texts[out] = st, lim, tx
        elif out in ("x", "y", "distance"):
            miss = np.flatnonzero(st == "missing")
            if miss.size:
                k = int(miss[0])
                message = "empty cell where a position is needed"
                raise InputError(message, path=p, row=int(rows[k]), column=src)
    detection_limit = _detection_limits(cols, header, frame, rows, p, data, notes)
    if "point" not in data:
        data["point"] = [str(k + 1) for k in range(len(data))]
    else:
        data["point"] = [s if s else str(k + 1) for k, s in enumerate(data["point"])]
    used_limits = {j for j, c in enumerate(cols) if c.kind == "limit" and c.canonical in detection_limit}
    ignored = [
        header[j] for j in range(len(header))
        if j not in names and j not in used_limits and not header[j].startswith("_blank")
    ]
    return Analyses(
        data=data,
        state=state,
        limit=limit,
        text=texts,
        columns=columns,
        units=units,
        path=p,
        header_row=header_row,
        sheet=table.sheet,
        delimiter=table.delimiter,
        decimal_comma=table.decimal_comma,
        ignored=ignored,
        notes=notes,
        detection_limit=detection_limit,
    )


#: Summary words that are also plausible point labels or comments ("N" for a
#: north traverse, "max" for the highest-An point): they mark a summary row only
#: in the block of rows after the last analysis, or where the row has no position.
_AMBIGUOUS_SUMMARY = {"n", "sd", "s.d.", "min", "max", "sum", "total", "count", "std", "avg", "avg."}
#: Rows between analyses that hold no oxide value (an analysis that lost its
#: numbers?) are refused above this share of the analyses kept (common practice:
#: a probe export has none; one in twenty is already a damaged table).
MAX_LOST_ROW_SHARE = 0.05


def _skip_non_analyses(frame, header, names, notes) -> tuple[np.ndarray, dict[int, str]]:
    """Which rows below the header are analyses; the reason each other row was skipped (by line)."""
    keep = np.ones(len(frame), dtype=bool)
    reasons: dict[int, str] = {}
    cells_by_row = frame[header].astype(object).to_numpy() if header else np.empty((len(frame), 0), dtype=object)
    by_name = {n: j for j, n in names.items()}
    # the label of a row is its point label (else its first cell); a comment counts only
    # where that label is blank
    label_j = by_name.get("point", 0)
    position_idx = [by_name[n] for n in ("x", "y", "distance") if n in by_name]
    oxide_idx = [j for j, n in names.items() if n in OXIDES]
    line_no = frame["_row"].to_numpy()
    header_names = {str(h).strip() for h in header}  # a repeated header repeats these names
    summary = np.zeros(len(frame), dtype=bool)
    word = np.zeros(len(frame), dtype=object)
    for k in range(len(frame)):
        row = cells_by_row[k]
        first_cell = str(row[0]).strip() if len(row) else ""
        if first_cell.startswith("#") and all(not str(c).strip() for c in row[1:]):
            keep[k] = False
            reasons[int(line_no[k])] = "comment line"
            continue
        if oxide_idx and all(not str(row[j]).strip() for j in oxide_idx):
            keep[k] = False  # a footer or note line: no oxide cell at all
            reasons[int(line_no[k])] = "without oxide values"
            notes.append(f"row {int(line_no[k])} skipped: no oxide values")
            continue
        if sum(1 for c in row if c in header_names) >= 2 and header_score(row) >= 2:
            keep[k] = False  # the header repeated (page break in an export)
            reasons[int(line_no[k])] = "repeated header"
            notes.append(f"row {int(line_no[k])} skipped: the header repeated")
            continue
        label = str(row[label_j]).strip() if len(row) > label_j else ""
        if not label and "comment" in by_name:  # no label: a summary word may stand in the comment
            label = str(row[by_name["comment"]]).strip()
        if label.lower().rstrip(":") in _SUMMARY_LABELS:
            summary[k], word[k] = True, label
    # a summary row has no stage position of its own, and an ambiguous word
    # ('N', 'max') counts only in the trailing block of summary rows
    trailing = np.zeros(len(frame), dtype=bool)
    for k in range(len(frame) - 1, -1, -1):
        if keep[k] and not summary[k]:
            break
        trailing[k] = True
    for k in np.flatnonzero(summary & keep):
        row = cells_by_row[k]
        no_position = not position_idx or all(not str(row[j]).strip() for j in position_idx)
        unambiguous = str(word[k]).strip().lower().rstrip(":") not in _AMBIGUOUS_SUMMARY
        if no_position and (unambiguous or trailing[k]):
            keep[k] = False
            reasons[int(line_no[k])] = "summary"
            notes.append(f"row {int(line_no[k])} ('{word[k]}') skipped as a summary row")
    return keep, reasons


def _refuse_lost_rows(reasons: dict[int, str], kept_rows: np.ndarray, path) -> None:
    """Refuse a table where too many rows between analyses hold no oxide value."""
    if kept_rows.size == 0:
        return
    inside = sorted(r for r, why in reasons.items()
                    if why == "without oxide values" and kept_rows.min() < r < kept_rows.max())
    if len(inside) > MAX_LOST_ROW_SHARE * kept_rows.size:
        shown = ", ".join(map(str, inside[:6])) + (", ..." if len(inside) > 6 else "")
        message = (
            f"{len(inside)} rows between the analyses hold no oxide value (rows {shown}), more than "
            f"{MAX_LOST_ROW_SHARE:.0%} of the {kept_rows.size} analyses: the table looks damaged; "
            "fill or delete those rows"
        )
        raise InputError(message, path=path, row=inside[0])


def _check_magnitudes(out, values, rows, path, src, cells):
    if out in OXIDES:
        limit, what = MAX_OXIDE_WT, "an oxide above 100 wt%"
    elif out.endswith("_ppm"):
        limit, what = MAX_PPM, "more than 10^6 ppm"
    elif out == "total_reported":
        limit, what = 1000.0, "an oxide total above 1000 wt%"
    else:
        limit, what = MAX_COORD, "a position beyond 10^7"
    bad = np.flatnonzero(np.isfinite(values) & (np.abs(values) > limit))
    if bad.size:
        k = int(bad[0])
        message = f"impossible value ({what})"
        raise InputError(message, path=path, row=int(rows[k]), column=src, text=str(cells[k]))


def _detection_limits(cols, header, frame, rows, path, data, notes) -> dict[str, np.ndarray]:
    """Detection-limit columns -> oxide wt% per row, for the oxides present."""
    from zoneprofile.io.columns import element_to_oxide_factor

    out: dict[str, np.ndarray] = {}
    for j, c in enumerate(cols):
        if c.kind != "limit" or not c.canonical:
            continue
        target = c.canonical
        if target == "Fe2O3" and "FeO" in data:
            target = "FeO"
        if target not in data or target in out:
            continue
        values = np.full(len(frame), np.nan)
        for k, text in enumerate(frame[header[j]].astype(object).to_numpy()):
            cell = parse_cell(text)
            if cell.state == "bad":
                message = "not a number in a detection-limit column"
                raise InputError(message, path=path, row=int(rows[k]), column=header[j], text=cell.text)
            if cell.state == "number":
                values[k] = cell.value
        if c.unit in ("wt%", "ppm"):
            values = values * element_to_oxide_factor(target) * (1e-4 if c.unit == "ppm" else 1.0)
            notes.append(f"detection limits in '{header[j]}' read as element {c.unit} and converted to {target} wt%")
        if np.any(np.isfinite(values) & (values > MAX_OXIDE_WT)):
            k = int(np.flatnonzero(np.isfinite(values) & (values > MAX_OXIDE_WT))[0])
            message = "impossible detection limit (above 100 wt%)"
            raise InputError(message, path=path, row=int(rows[k]), column=header[j])
        out[target] = values
    return out
