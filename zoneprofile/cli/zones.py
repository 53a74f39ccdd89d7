"""`zoneprofile zones`: read the zoning of one profile."""

from __future__ import annotations

DESCRIPTION = """\
Read the zoning architecture of a composition profile: growth steps (position,
values on both sides, change, width, normal/reverse), continuous zoning within
each zone, oscillatory bands, resorption surfaces with their evidence, mantles
(species changes), and, with --temperature-c and trace elements, melt
equivalents and a recharge fingerprint per step.

PROFILE is a 'zoneprofile recalc' output or any table with 'distance_um'
(0 at the rim) and the column to read. Points flagged by QC are left out.
An '<column>_sd' column gives per-point precision; otherwise the noise is
estimated from the profile unless --noise-sd is given.

Outputs: ZONES.json (-o), a paste-ready zone table (--table .csv/.tsv/.xlsx),
a figure (--plot .png/.svg/.pdf).
"""

from zoneprofile.cli._figure_width import add_figure_width

_ELEMENTS = ("Li Be B Na Mg Al P K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge Rb Sr Y Zr Nb Cs Ba La Ce Pr Nd Sm Eu "
             "Gd Tb Dy Ho Er Tm Yb Lu Hf Ta Pb Th U").split()
_OXIDES = ("SiO2", "TiO2", "Al2O3", "FeO", "Fe2O3", "MnO", "MgO", "CaO", "SrO", "BaO", "Na2O", "K2O", "P2O5")
_MOL = ("An", "Ab", "Or", "Fo")


def configure(parser):
    parser.add_argument("profile", metavar="PROFILE", help="profile table (.csv, .tsv, .xlsx) with distance_um")
    parser.add_argument("-o", "--output", metavar="ZONES.json", required=True, help="JSON result to write")
    parser.add_argument("--column", default="An", help="column to read (default: An)")
    parser.add_argument("--noise-sd", type=float, metavar="X", help="1-sigma analytical noise of the column")
    parser.add_argument("--temperature-c", type=float, metavar="T", help="temperature for melt equivalents (°C)")
    parser.add_argument("--endmember", action="append", default=[], metavar="EL_ppm=FIRST,SECOND",
                        help="end-member melt concentrations for lever-rule mixing (repeatable)")
    parser.add_argument("--min-step", type=float, metavar="X", help="smallest step reported (default 3 noise sd)")
    parser.add_argument("--table", metavar="ZONES.csv", help="also write the zone table (.csv, .tsv, .xlsx)")
    parser.add_argument("--plot", metavar="FIG.png", help="also draw the figure (.png, .svg, .pdf): the report's "
                        "profile panel; points flagged by QC drawn hollow and grey")
    add_figure_width(parser)
    parser.add_argument("--include-flagged", action="store_true", help="keep points whose qc is not ok")
    parser.add_argument("--sheet", help="sheet name of an .xlsx workbook")
    parser.add_argument("--force", action="store_true", help="overwrite existing outputs")


def _parse_endmembers(items):
    from zoneprofile._validation import InputError

    out = {}
    for item in items:
        key, sep, rest = item.partition("=")
        parts = rest.split(",")
        try:
            if not sep or len(parts) != 2:
                raise ValueError
            out[key.strip()] = (float(parts[0]), float(parts[1]))
        except ValueError:
            message = "--endmember must look like Sr_ppm=FIRST,SECOND"
            raise InputError(message, column="--endmember", text=item) from None
    return out


def run(args) -> int:
    from pathlib import Path

    import numpy as np

    from zoneprofile._output import check_outputs, write_json, write_table
    from zoneprofile._validation import InputError, require_finite

    # options first, with light imports only, so a wrong option is refused at once

    for opt, path, exts in (("-o", args.output, (".json",)), ("--table", args.table, (".csv", ".tsv", ".xlsx")),
                            ("--plot", args.plot, (".png", ".svg", ".pdf"))):
        if path is not None and Path(path).suffix.lower() not in exts:
            message = f"{opt} must end in {', '.join(exts)}"
            raise InputError(message, column=opt, text=path)
    check_outputs(args.output, args.table, args.plot, force=args.force)
    if args.noise_sd is not None and (not np.isfinite(args.noise_sd) or args.noise_sd <= 0):
        raise InputError("--noise-sd must be a positive number", column="--noise-sd", text=args.noise_sd)
    if args.temperature_c is not None:
        require_finite(args.temperature_c, "--temperature-c")
    endmembers = _parse_endmembers(args.endmember)
    from zoneprofile.io import read_profile
    from zoneprofile.zoning.analyse import MIN_POINTS, RANGES, analyse_zoning
    column = args.column
    optional = [f"{column}_sd", *_OXIDES, *(f"{e}_ppm" for e in _ELEMENTS), *(m for m in _MOL if m != column)]
    optional = [c for c in optional if c != column]
    frame = read_profile(args.profile, columns=(column,), optional=optional,
                         include_flagged=args.include_flagged, sheet=args.sheet)
    path = Path(args.profile)
    rows = frame["_row"].to_numpy()
    if len(frame) < MIN_POINTS:
        message = f"{len(frame)} usable points; reading zoning needs at least {MIN_POINTS}"
        raise InputError(message, path=path, column=column)
    y = frame[column].to_numpy(dtype=float)
    if column in RANGES:
        lo, hi = RANGES[column]
        bad = np.flatnonzero((y < lo) | (y > hi))
        if bad.size:
            k = int(bad[0])
            message = f"{column} must lie between {lo:g} and {hi:g} mol%"
            raise InputError(message, path=path, row=int(rows[k]), column=column, text=f"{y[k]:g}")
    value_sd = None
    sd_col = f"{column}_sd"
    if sd_col in frame and args.noise_sd is None:
        sd = frame[sd_col].to_numpy(dtype=float)
        bad = np.flatnonzero(~np.isfinite(sd) | (sd <= 0))
        if bad.size:
            k = int(bad[0])
            message = "per-point precision must be a positive number"
            raise InputError(message, path=path, row=int(rows[k]), column=sd_col,
                             text="" if not np.isfinite(sd[k]) else f"{sd[k]:g}")
        value_sd = sd
    extra_cols = [c for c in frame.columns if c in optional and c != sd_col]
    extra = frame[extra_cols].astype(float).reset_index(drop=True) if extra_cols else None
    result = analyse_zoning(frame["distance_um"].to_numpy(dtype=float), y, column=column,
                            noise_sd=args.noise_sd, value_sd=value_sd, extra=extra,
                            temperature_c=args.temperature_c, melt_endmembers=endmembers or None,
                            min_change=args.min_step)
    out = result.to_dict()
    out["source"] = {"file": str(path), "rows_used": int(len(frame)), "points_left_out_by_qc":
                     None if args.include_flagged else "rows whose qc is not 'ok'"}
    write_json(args.output, out)
    if args.table:
        write_table(args.table, result.zones_table())
    if args.plot:
        from zoneprofile.report.figures import write_figure, zoning_canvas

        write_figure(zoning_canvas(_figure_record(result, args, column, value_sd, frame),
                                   width=args.figure_width), args.plot)
    print(result.summary())
    return 0


def _figure_record(result, args, column, value_sd, frame):
    """The record part the report draws for this profile: every point read, flagged ones marked.

    Points left out by QC are read again (with their flags) only for the figure;
    when they cannot be read as numbers the figure shows the points analysed.
    """
    import numpy as np

    from zoneprofile._validation import InputError
    from zoneprofile.io import read_profile
    from zoneprofile.report.figures import zoning_record

    if not args.include_flagged:
        try:
            full = read_profile(args.profile, columns=(column,), optional=(f"{column}_sd",), include_flagged=True,
                                sheet=args.sheet)
        except InputError:
            full = None
        if full is not None and len(full) > len(frame):
            qc = ["ok" if str(q).strip().lower() in ("ok", "") else str(q) for q in full["qc"]]
            sd = None
            if value_sd is not None and f"{column}_sd" in full:
                sd = full[f"{column}_sd"].to_numpy(dtype=float)
            elif args.noise_sd is not None:
                sd = np.full(len(full), float(args.noise_sd))
            return zoning_record(result, value_sd=sd, qc=qc, distance_um=full["distance_um"].to_numpy(float),
                                 value=full[column].to_numpy(float))
    sd = value_sd if value_sd is not None else (
        np.full(len(frame), float(args.noise_sd)) if args.noise_sd is not None else None)
    return zoning_record(result, value_sd=sd)
