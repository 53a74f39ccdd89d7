"""Reading the header and value columns of a profile, shared by ``fit`` and ``fit --crystal``."""

from __future__ import annotations


def _value_column(frame_columns, element, mineral, path):
    from zoneprofile._validation import InputError
    from zoneprofile.diffusion.fitting import ELEMENT_COLUMNS

    col = ELEMENT_COLUMNS.get((element, mineral))
    if col is None:
        raise InputError(f"no diffusion model for {element} in {mineral}; see 'zoneprofile laws'")
    if col == "Fo" and "Fo" not in frame_columns and "X_Fe" in frame_columns:
        return "X_Fe"
    if col not in frame_columns:
        raise InputError(f"no '{col}' column: {element} in {mineral} is read from '{col}'", path=path)
    return col


def _header(path):
    from zoneprofile.io.profile import read_text_table

    if str(path).lower().endswith((".xlsx", ".xlsm")):
        from zoneprofile.io.profile import read_profile

        return set(read_profile(path, columns=(), include_flagged=True).columns) | _xlsx_header(path)
    frame, _ = read_text_table(path, header_contains=("distance_um",))
    return {c.strip() for c in frame.columns}


def _xlsx_header(path):
    try:
        from zoneprofile.io import tables

        return {c.strip() for c in tables.read_sheet_as_text(path, header_contains=("distance_um",)).columns}
    except Exception:  # noqa: BLE001 - fall back to read_profile's own error
        return set()


def _check_column(frame, col, path, *, low=0.0, high=None, what="concentration"):
    import numpy as np

    from zoneprofile._validation import InputError

    values = frame[col].to_numpy(float)
    bad = np.flatnonzero(values < low) if high is None else np.flatnonzero((values < low) | (values > high))
    if bad.size:
        k = int(bad[0])
        rng = f">= {low:g}" if high is None else f"between {low:g} and {high:g}"
        message = f"{what} must be {rng}"
        raise InputError(message, path=path, row=int(frame["_row"].iloc[k]), column=col, text=f"{values[k]:g}")
    return values
