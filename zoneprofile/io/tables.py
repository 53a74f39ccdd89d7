"""Reading any supported table file into rows of text cells.

Text tables (comma, tab, semicolon; decimal commas with semicolons or tabs;
whitespace-aligned as a last resort) and Excel workbooks (.xlsx) come back as
lists of stripped strings with the line (or spreadsheet row) number a user
sees, so every later error can name the row.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pandas as pd

from zoneprofile._validation import InputError, require_file

__all__ = ["RawTable", "read_raw_table", "read_sheet_as_text", "frame_below_header", "header_cells"]

_ENCODINGS = ("utf-8-sig", "cp1252", "latin-1")
_DELIMITERS = ("\t", ";", ",")
_LINE_BREAK = re.compile(r"\r\n|\r|\n")
_DECIMAL_COMMA = re.compile(r"^[<>]?\s*[-+]?\d+,\d+([eE][-+]?\d+)?$")


@dataclass
class RawTable:
    """Rows of text cells with their 1-based line (spreadsheet row) numbers."""

    rows: list[list[str]]
    lines: list[int]
    path: Path
    delimiter: str | None = None  # None for .xlsx
    sheet: str | None = None
    decimal_comma: bool = False
    sheets: list[str] = field(default_factory=list)
    ends_cleanly: bool = True  # a text file ending with a line break (False hints at truncation)


def _decode(path: Path) -> str:
    raw = path.read_bytes()
    if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):  # UTF-16 text, as spreadsheet programs save "Unicode text"
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError:
            message = "cannot decode this UTF-16 text file (truncated?)"
            raise InputError(message, path=path) from None
    head = raw[:4096]
    if raw[:2] == b"PK":
        message = "looks like a zip or Excel file; give it the .xlsx extension"
        raise InputError(message, path=path)
    if b"\x00" in head or raw[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":
        message = "looks like a binary file, expected a text table (CSV/TSV) or .xlsx"
        raise InputError(message, path=path)
    control = sum(1 for b in head if b < 32 and b not in (9, 10, 13))
    if control > max(2, len(head) // 50):
        message = "looks like a binary file, expected a text table (CSV/TSV) or .xlsx"
        raise InputError(message, path=path)
    for enc in _ENCODINGS:
        try:
            return raw.decode(enc)
        except UnicodeDecodeError:
            continue
    message = "cannot decode the file as text"  # pragma: no cover - latin-1 decodes anything
    raise InputError(message, path=path)


#: Longest cell read (characters): Python's csv limit; no analysis, label or
#: comment comes near it (a spreadsheet cell holds at most 32,767).
MAX_CELL_CHARS = 131_072


def _split(lines: list[str], delimiter: str | None) -> list[list[str]]:
    """Quick split for choosing the delimiter (quotes honoured, never raises)."""
    if delimiter is None:  # whitespace-aligned columns
        return [ln.split() for ln in lines]
    try:
        return [[c.strip() for c in row] for row in csv.reader(lines, delimiter=delimiter)]
    except csv.Error:  # an over-long cell: the full read names the row
        return [[c.strip() for c in ln.split(delimiter)] for ln in lines]


def _refuse_long_cell(path: Path, row: int, length: int | None = None) -> None:
    size = f"of {length:,} characters" if length else "longer than the limit"
    message = (
        f"a cell {size} (more than {MAX_CELL_CHARS:,} characters): not a value, label or comment of a table "
        "(a damaged file, or a stray quote?)"
    )
    raise InputError(message, path=path, row=row)


def _split_records(lines: list[str], delimiter: str | None, path: Path) -> tuple[list[list[str]], list[int]]:
    """Split every line into cells, keeping the line number where each record starts.

    A quoted cell may hold a line break (a multi-line comment). A quote that is
    never closed, or one that swallows whole lines of cells (a stray ``"``),
    would silently merge the rest of the table into one cell: refused, naming
    the row where the quote opens.
    """
    if delimiter is None:
        return [ln.split() for ln in lines], list(range(1, len(lines) + 1))
    reader = csv.reader((ln + "\n" for ln in lines), delimiter=delimiter, strict=True)
    rows, starts = [], []
    previous = 0
    while True:
        start = previous + 1
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            if "field larger" in str(exc):
                _refuse_long_cell(path, start)
            message = (
                'a quote (") opened in this row is never closed, so the rest of the file would be read as '
                "one cell; remove the stray quote or close it"
            )
            if reader.line_num <= start:  # a quote followed by text, e.g. '"5.2"x'
                message = 'a quoted cell is followed by more text before the next separator; remove the stray quote (")'
            raise InputError(message, path=path, row=start) from None
        end = reader.line_num
        previous = end
        if end > start and any(delimiter in ln for ln in lines[start:end]):
            message = (
                f'a quote (") opened in this row runs to row {end} and swallows {end - start} line(s) of cells; '
                "remove the stray quote or close it"
            )
            raise InputError(message, path=path, row=start)
        rows.append([c.strip() for c in row])
        starts.append(start)
    return rows, starts


def _text_rows(path: Path, is_header: Callable[[list[str]], int] | None) -> RawTable:
    text = _decode(path)
    # only CR, LF and CRLF end a line (as for the csv module and text editors); str.splitlines
    # would also break at form feeds, \x1c-\x1e and U+2028 inside a cell and shift its row
    lines = _LINE_BREAK.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    if not any(ln.strip() for ln in lines):
        raise InputError("file holds no text", path=path)
    candidates = list(_DELIMITERS) + [None]
    best, best_score = None, (-1, 0)
    for delim in candidates:
        if delim is not None and not any(delim in ln for ln in lines[:200]):
            continue
        rows = _split(lines[:200], delim)
        if is_header is not None:
            score = max((is_header(r) for r in rows), default=0)
        else:
            score = 0
        widths = [len(r) for r in rows if any(c for c in r)]
        common = max(set(widths), key=widths.count) if widths else 0
        key = (score, widths.count(common) * (common > 1))
        if key > best_score:
            best, best_score = delim, key
    if best is None and best_score[0] <= 0:
        best = ","
    rows, starts = _split_records(lines, best, path)
    rows, decimal_comma = _decimal_points(rows)
    return RawTable(
        rows, starts, path, delimiter=best, decimal_comma=decimal_comma,
        ends_cleanly=text.endswith(("\n", "\r")),
    )


def _decimal_points(rows: list[list[str]]) -> tuple[list[list[str]], bool]:
    """Turn decimal commas ('55,23', '<0,03') into points; a comma inside one
    cell can only be a decimal comma once the row has been split."""
    found = any(_DECIMAL_COMMA.match(c) for r in rows for c in r)
    if not found:
        return rows, False
    return [[c.replace(",", ".") if _DECIMAL_COMMA.match(c) else c for c in r] for r in rows], True


def _cell_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    if hasattr(value, "isoformat"):
        return value.isoformat()
    return str(value).strip()


#: Bounds on the parts of a workbook, checked before anything is inflated: a
#: part's declared size and its inflation ratio (a real sheet compresses 5-30
#: fold; a part of empty rows made to fill memory compresses a thousand fold).
MAX_XLSX_PART_BYTES = 256 << 20
MAX_XLSX_TOTAL_BYTES = 1 << 30
MAX_XLSX_RATIO = 200
#: A formula with no saved value ends right after its formula element.
_UNCACHED_FORMULA = re.compile(rb"(</f>|<f\b[^>]*/>)\s*</c>")


def _exc_name(exc: BaseException) -> str:
    name = type(exc).__name__
    return f"{type(exc).__module__} {name}" if name == "error" else name  # zlib.error -> 'zlib error'


def check_xlsx_parts(path: Path) -> None:
    """Refuse a workbook whose parts would inflate beyond the bounds, or whose
    formula cells have no saved value (they would read as blank cells)."""
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            infos = z.infolist()
            total = sum(i.file_size for i in infos)
            for info in infos:
                ratio = info.file_size / max(info.compress_size, 1)
                if info.file_size > MAX_XLSX_PART_BYTES or (info.file_size > (1 << 20) and ratio > MAX_XLSX_RATIO):
                    message = (
                        f"workbook part '{info.filename}' would inflate to {info.file_size / 2**20:.0f} MiB "
                        f"({ratio:.0f} times its stored size; limits {MAX_XLSX_PART_BYTES >> 20} MiB and "
                        f"{MAX_XLSX_RATIO} times): refusing it as damaged or hostile; save the sheet as CSV"
                    )
                    raise InputError(message, path=path)
            if total > MAX_XLSX_TOTAL_BYTES:
                message = (f"workbook would inflate to {total / 2**30:.1f} GiB (limit {MAX_XLSX_TOTAL_BYTES >> 30} GiB); "
                           "save the sheet as CSV")
                raise InputError(message, path=path)
            for info in infos:
                if not (info.filename.startswith("xl/worksheets/") and info.filename.endswith(".xml")):
                    continue
                found, tail = 0, b""
                with z.open(info) as fh:
                    for block in iter(lambda: fh.read(1 << 20), b""):
                        chunk = tail + block  # a match may straddle two blocks; count it once
                        found += sum(1 for m in _UNCACHED_FORMULA.finditer(chunk) if m.end() > len(tail))
                        tail = chunk[-64:]
                if found:
                    message = (
                        f"the workbook holds {found} formula cell(s) without a saved value in "
                        f"'{info.filename.rsplit('/', 1)[-1]}' (written by a program that does not compute "
                        "formulas); they would read as blank: open and save it in a spreadsheet program, "
                        "or paste values"
                    )
                    raise InputError(message, path=path)
    except InputError:
        raise
    except Exception as exc:
        message = f"cannot read this .xlsx (damaged, truncated or not an Excel workbook: {_exc_name(exc)})"
        raise InputError(message, path=path) from None


def _xlsx_rows(path: Path, sheet, is_header) -> RawTable:
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - a declared dependency
        raise InputError("reading .xlsx needs the 'openpyxl' package", path=path) from None
    check_xlsx_parts(path)
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # any failure to parse a workbook is a damaged input
        message = f"cannot read this .xlsx (damaged, truncated or not an Excel workbook: {_exc_name(exc)})"
        raise InputError(message, path=path) from None
    try:
        names = list(wb.sheetnames)
        if sheet is not None:
            def norm(t):
                return " ".join(str(t).replace("_", " ").split()).lower()

            lookup = {norm(n): n for n in names}
            key = norm(sheet)
            if key not in lookup:
                message = f"no sheet named '{sheet}'; sheets: {', '.join(names)}"
                raise InputError(message, path=path, column="--sheet")
            order = [lookup[key]]
        else:
            order = names
        chosen, chosen_score = None, 0
        for name in order:
            try:
                rows = [[_cell_text(v) for v in row] for row in wb[name].iter_rows(values_only=True)]
                rows, _ = _decimal_points(rows)
            except Exception as exc:  # XML, zlib or zip errors of a damaged part
                message = f"cannot read sheet '{name}' (damaged workbook: {_exc_name(exc)})"
                raise InputError(message, path=path) from None
            table = RawTable(rows, list(range(1, len(rows) + 1)), path, sheet=name, sheets=names)
            if sheet is not None or is_header is None:
                return table
            score = max((is_header(r) for r in rows), default=0)
            if score >= 2:  # a clear header: take this sheet
                return table
            if chosen is None or (score > 0 and chosen_score == 0):
                chosen, chosen_score = table, score
        if chosen is None:
            raise InputError("workbook has no sheets", path=path)
        return chosen
    finally:
        wb.close()


def read_raw_table(path, *, sheet=None, is_header: Callable[[list[str]], int] | None = None) -> RawTable:
    """Read a CSV/TSV/semicolon/whitespace text table or an .xlsx sheet as text rows.

    Parameters
    ----------
    path : path-like
        The table. ``.xlsx``/``.xlsm`` are read as workbooks, anything else as text.
    sheet : str, optional
        Workbook sheet name (case-insensitive). Default: the first sheet holding
        a row for which ``is_header`` is positive, else the first sheet.
    is_header : callable, optional
        Scores a row of cells (> 0: could be the header). Used to choose the
        delimiter of a text file and the default sheet of a workbook.
    """
    p = require_file(path, what="table")
    ext = p.suffix.lower()
    if ext in (".xlsx", ".xlsm"):
        return _xlsx_rows(p, sheet, is_header)
    if ext in (".xls", ".ods", ".numbers"):
        message = f"'{ext}' files cannot be read; save the sheet as .xlsx or CSV"
        raise InputError(message, path=p)
    if sheet is not None:
        message = "--sheet applies to .xlsx workbooks only"
        raise InputError(message, path=p, column="--sheet")
    return _text_rows(p, is_header)


def header_cells(table: RawTable, header_index: int) -> list[str]:
    """The stripped header cells, without trailing blanks."""
    header = [c.strip() for c in table.rows[header_index]]
    while header and header[-1] == "":
        header.pop()
    return header


def frame_below_header(table: RawTable, header_index: int, *, dedupe: bool = False) -> pd.DataFrame:
    """Rows below ``table.rows[header_index]`` as a DataFrame of str with ``_row``.

    Blank rows are skipped; short rows are padded with ''. Duplicate column
    names raise :class:`InputError` naming the header row, unless ``dedupe``
    (the caller has checked the columns it uses), which renames later
    copies ``name#2``, ``name#3``. Columns keep the header's order.
    """
    header = header_cells(table, header_index)
    seen: dict[str, int] = {}
    for j, name in enumerate(header):
        if name and name in seen:
            if dedupe:
                k = 2
                while f"{name}#{k}" in seen:
                    k += 1
                header[j] = f"{name}#{k}"
                seen[header[j]] = j
                continue
            message = f"duplicate column '{name}' (columns {seen[name] + 1} and {j + 1}); rename or remove one"
            raise InputError(message, path=table.path, row=table.lines[header_index], column=name)
        seen[name] = j
    header = [name if name else f"_blank{j + 1}" for j, name in enumerate(header)]
    records, rows = [], []
    for i in range(header_index + 1, len(table.rows)):
        row = table.rows[i]
        if not any(c.strip() for c in row):
            continue
        if len(row) > len(header) and any(c.strip() for c in row[len(header):]):
            _refuse_extra_cells(table, i, row, len(header))
        longest = max(map(len, row))
        if longest > MAX_CELL_CHARS:
            _refuse_long_cell(table.path, table.lines[i], longest)
        cells = [c.strip() for c in row] + [""] * max(0, len(header) - len(row))
        records.append(cells[: len(header)])
        rows.append(table.lines[i])
    frame = pd.DataFrame(records, columns=header, dtype=object) if records else pd.DataFrame(columns=header, dtype=object)
    frame["_row"] = rows
    return frame


def _refuse_extra_cells(table: RawTable, i: int, row: list[str], width: int) -> None:
    """A data row wider than the header: its last cells would be dropped and the
    others may have shifted (a decimal comma in a comma-separated file turns
    '52,2' into two cells). Never guessed: the row is named."""
    filled = len(row)
    while filled > width and not row[filled - 1].strip():
        filled -= 1
    message = f"row has {filled} cells but the header has {width}; cells beyond the header would be lost"
    if table.delimiter == ",":
        message += (
            " (likely cause: decimal commas in a comma-separated file, '52,2' read as two cells; "
            "save it with ';' as separator or with decimal points)"
        )
    else:
        message += " (a column without a name in the header?)"
    extra = next(c for c in row[width:] if c.strip())
    raise InputError(message, path=table.path, row=table.lines[i], text=extra)


def read_sheet_as_text(path, *, sheet=None, header_contains=None) -> pd.DataFrame:
    """Read an .xlsx sheet (or a text table) as a DataFrame of stripped strings.

    Parameters
    ----------
    path : path-like
        Workbook (``.xlsx``) or text table.
    sheet : str, optional
        Sheet name; default the first sheet whose rows include a header.
    header_contains : iterable of str, optional
        Lower-case names, one of which must appear in the header row; rows
        above it (titles) are skipped. Default: the first non-empty row.

    Returns
    -------
    DataFrame of str
        One column per header cell ('' for blank cells) and ``_row``, the
        1-based spreadsheet row of each record.
    """
    wanted = None if header_contains is None else {str(w).strip().lower() for w in header_contains}

    def is_header(row):
        cells = {c.strip().lower() for c in row if c.strip()}
        if not cells:
            return 0
        return 1 if wanted is None else len(wanted & cells)

    return _sheet_frame(path, sheet, is_header, wanted)[0]


def _sheet_frame(path, sheet, is_header, wanted) -> tuple[pd.DataFrame, int]:
    table = read_raw_table(path, sheet=sheet, is_header=is_header)
    for i, row in enumerate(table.rows):
        if is_header(row) > 0:
            return frame_below_header(table, i), table.lines[i]
    need = ", ".join(sorted(wanted)) if wanted else "a header"
    where = f" in sheet '{table.sheet}'" if table.sheet else ""
    message = f"no header row found{where}; expected a row naming {need}"
    raise InputError(message, path=table.path)
