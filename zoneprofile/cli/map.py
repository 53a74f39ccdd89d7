"""`zoneprofile map`: calibrate an element map and extract a composition profile."""

from __future__ import annotations

DESCRIPTION = """\
Calibrate an element map (or a ratio of two channels) against spot analyses
located on it, then extract a composition profile along a line drawn from the
rim inward, or binned by distance from the crystal edge (--rim-normal).

Writes PROFILE.csv (distance_um, the calibrated column, its sd, n_pixels, qc)
and PROFILE.json beside it (calibration, crystal mask, boundaries crossed with
their obliquity to the line, 2-D resorption evidence, input checksums). The
profile goes straight into 'zoneprofile zones' and 'zoneprofile fit'.

Positions are in pixels with x = column and y = row, pixel centres at whole
numbers; distance is measured from the line's start.

Example:
  zoneprofile map plag7_Ca.tif --pixel-um 0.5 --spots plag7_spots.csv \\
      --line 120,88,260,190 --width-px 7 -o plag7_map.csv --plot plag7_map.png
"""

from zoneprofile.cli._figure_width import add_figure_width


def _floats(text, n, name):
    from zoneprofile._validation import InputError

    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != n:
        raise InputError(f"{name} needs {n} comma-separated numbers", text=text)
    try:
        return [float(p) for p in parts]
    except ValueError:
        raise InputError(f"{name} needs {n} comma-separated numbers", text=text) from None


def configure(parser):
    parser.add_argument("image", metavar="IMAGE", help="map: TIFF, PNG, NPY or a text matrix (.csv/.tsv/.txt)")
    parser.add_argument("--pixel-um", type=str, default=None, metavar="P",
                        help="pixel size in µm (default: from the TIFF resolution tags)")
    parser.add_argument("--channel", default=None, metavar="NAME", help="channel name or page number")
    parser.add_argument("--ratio-with", default=None, metavar="NAME",
                        help="calibrate CHANNEL/(CHANNEL+NAME), e.g. --channel Ca --ratio-with Na")
    parser.add_argument("--spots", required=True, metavar="SPOTS.csv",
                        help="spot analyses: x_px,y_px (or x_um,y_um), the composition column, optional spot_um, phase")
    mode = parser.add_mutually_exclusive_group(required=True)
    mode.add_argument("--line", metavar="X0,Y0,X1,Y1", help="profile line in pixels, from the rim inward")
    mode.add_argument("--rim-normal", action="store_true", help="profile binned by distance from the crystal edge")
    parser.add_argument("--width-px", default="5", metavar="W", help="pixels averaged across the line (default 5, which brings single-pixel counting noise down about 2x; use 1 for no averaging)")
    parser.add_argument("--column", default="An", help="calibrated quantity, a column of the spot table (default An)")
    parser.add_argument("--spot-um", default=None, metavar="D", help="spot diameter in µm (default: spot_um column)")
    parser.add_argument("--seed", default=None, metavar="X,Y", help="a point on the crystal to profile (pixels)")
    parser.add_argument("--bin-um", default=None, metavar="B", help="bin width of the rim-normal profile in µm")
    parser.add_argument("--counts-per-unit", default=None, metavar="G",
                        help="counts per unit of the map values, for the counting error (default: raw counts)")
    parser.add_argument("--boundary-um", action="append", default=None, metavar="X",
                        help="measure the boundary at this distance instead of finding boundaries (repeatable)")
    parser.add_argument("-o", "--output", required=True, metavar="PROFILE.csv", help="profile table to write")
    parser.add_argument("--plot", default=None, metavar="FIG", help="figure to write (.png, .svg or .pdf): the "
                        "report's profile and map panels")
    add_figure_width(parser)
    parser.add_argument("--force", action="store_true", help="overwrite existing outputs")


def run(args) -> int:
    from pathlib import Path

    from zoneprofile._output import check_outputs, write_json, write_table
    from zoneprofile._validation import InputError, require_finite, require_positive
    from zoneprofile.maps import extract_profile

    out = Path(args.output)
    if out.suffix.lower() not in (".csv", ".tsv"):
        raise InputError("the profile output must end in .csv or .tsv", path=out)
    json_path = out.with_suffix(".json")
    fig_path = Path(args.plot) if args.plot else None
    if fig_path is not None and fig_path.suffix.lower() not in (".png", ".svg", ".pdf"):
        raise InputError("the figure must end in .png, .svg or .pdf", path=fig_path)
    check_outputs(out, json_path, fig_path, force=args.force)

    pixel_um = require_positive(args.pixel_um, "--pixel-um") if args.pixel_um is not None else None
    spot_um = require_positive(args.spot_um, "--spot-um") if args.spot_um is not None else None
    bin_um = require_positive(args.bin_um, "--bin-um") if args.bin_um is not None else None
    counts = require_positive(args.counts_per_unit, "--counts-per-unit") if args.counts_per_unit else None
    try:
        width = int(str(args.width_px))
    except ValueError:
        raise InputError("--width-px must be a whole number of pixels", text=args.width_px) from None
    line = _floats(args.line, 4, "--line") if args.line else None
    seed = _floats(args.seed, 2, "--seed") if args.seed else None
    bounds = [require_finite(b, "--boundary-um") for b in args.boundary_um] if args.boundary_um else None

    profile, info = extract_profile(
        args.image, pixel_um=pixel_um, spots_path=args.spots, line=line, rim_normal=args.rim_normal,
        width_px=width, channel=args.channel, column=args.column, spot_um=spot_um, seed_xy=seed,
        ratio_with=args.ratio_with, counts_per_unit=counts, boundary_um=bounds, bin_um=bin_um,
    )
    record = {k: v for k, v in info.items() if not k.startswith("_")}
    from zoneprofile import __version__

    record["software"] = {"name": "zoneprofile", "version": __version__, "command": "map"}
    record["profile_file"] = out.name
    fig_bytes = None
    if fig_path is not None:  # the report's profile and map panels (one figure system: docs/report.md)
        from zoneprofile.maps.plot import plot_map_profile
        from zoneprofile.report.figures import canvas_bytes

        canvas = plot_map_profile(profile, info, None, column=args.column, width=args.figure_width)
        fig_bytes = canvas_bytes(canvas, fig_path.suffix.lower()[1:])
    write_table(out, profile)
    write_json(json_path, record)
    if fig_bytes is not None:
        from zoneprofile._output import write_bytes

        write_bytes(fig_path, fig_bytes)
    cal = info["calibration"]
    print(
        f"wrote {out} ({len(profile)} points) and {json_path.name}: {args.column} = (signal - {cal['intercept']:.4g})"
        f" / {cal['slope']:.4g}, r2 {cal['r2']:.3f}, n {cal['n']}; {len(info['boundaries'])} boundar"
        f"{'y' if len(info['boundaries']) == 1 else 'ies'}"
        + "".join(
            f"; {b['position_um']:.1f} um psi {b['obliquity_deg']:.0f} deg" for b in info["boundaries"]
            if b.get("obliquity_deg") is not None
        )
    )
    for w in info["warnings"]:
        print(f"note: {w}")
    return 0
