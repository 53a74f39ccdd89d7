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


def read_sd(frame, col, path, notes=None):
    """The column's 1-sigma precision ``{col}_sd`` when every point has one (each > 0), else None.

    A ``{col}_sd`` column with blank cells among the analyses fitted is not used
    (one precision per point or none); ``notes`` (a list) then gets a sentence
    saying so, since the fit falls back on the noise of the residuals.
    """
    import numpy as np

    from zoneprofile._validation import InputError

    name = f"{col}_sd"
    if name not in frame:
        return None
    missing = int(np.count_nonzero(~np.isfinite(frame[name].to_numpy(float))))
    if missing:
        if notes is not None:
            notes.append(f"{name} is blank for {missing} of the {len(frame)} analyses fitted, so it is not used: "
                         "the noise is estimated from the fit's residuals; fill every cell to weight by it")
        return None
    sd = _check_column(frame, name, path, what="1-sigma precision")
    if np.any(sd <= 0):
        k = int(np.flatnonzero(sd <= 0)[0])
        raise InputError("1-sigma precision must be > 0", path=path, row=int(frame["_row"].iloc[k]), column=name)
    return sd


def read_an(args, frame, profile_path, distance):
    """An along the profile for An-coupled elements: ``(an, an_x, an_beam_um, an_source)``.

    From ``--an`` (unzoned), ``--an-from`` (another table, shifted by
    ``--offset-um``; it must overlap the profile) or the profile's own An column
    (no empty cell; its spot is the profile's unless ``--an-beam-um`` says otherwise).
    """
    import hashlib

    import numpy as np

    from zoneprofile._validation import InputError, require_file
    from zoneprofile.io.profile import read_profile

    an_beam = args.an_beam_um
    an_source = None
    if args.an is not None and args.an_from is None:
        return np.full(distance.size, float(args.an)), distance, an_beam, an_source
    if args.an_from is not None:
        an_path = require_file(args.an_from, what="An table")
        an_frame = read_profile(an_path, columns=("An",), include_flagged=args.include_flagged)
        an = _check_column(an_frame, "An", an_path, low=0.0, high=100.0, what="An (mol%)")
        an_x = an_frame["distance_um"].to_numpy(float) + float(args.offset_um)
        if an_x[-1] < distance[0] or an_x[0] > distance[-1]:
            raise InputError("the An table does not overlap the profile after --offset-um; check the offset",
                             path=an_path)
        an_source = {"path": str(an_path), "sha256": hashlib.sha256(an_path.read_bytes()).hexdigest(),
                     "offset_um": args.offset_um, "an_beam_um": an_beam}
        return an, an_x, an_beam, an_source
    blank = np.flatnonzero(~np.isfinite(frame["An"].to_numpy(float)))
    if blank.size:
        k = int(blank[0])
        raise InputError("empty An cell; An is needed at every point (or use --an-from)",
                         path=profile_path, row=int(frame["_row"].iloc[k]), column="An")
    an = _check_column(frame, "An", profile_path, low=0.0, high=100.0, what="An (mol%)")
    return an, distance, args.beam_um if an_beam is None else an_beam, an_source
