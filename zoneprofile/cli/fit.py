"""`zoneprofile fit`: fit a diffusion model to the boundaries of a profile and date them."""

from __future__ import annotations

from zoneprofile.cli._columns import _check_column, _header, _value_column, read_an, read_sd  # shared with fit --crystal
from zoneprofile.cli._figure_width import add_figure_width

DESCRIPTION = """\
Fit the diffusion equation to one or more zone boundaries of a profile and turn
the fitted D·t into a time at the given temperature, with Monte Carlo
uncertainty over temperature, law parameters, analytical noise and (if given)
obliquity of the traverse.

The profile needs distance_um and the element column: Mg_ppm / Sr_ppm / Ba_ppm
(feldspars), Fo or X_Fe (olivine), Mg_number (clinopyroxene), Ti_ppm (quartz).
Plagioclase Mg, Sr, Ba also need An (in the same table or from --an-from).
A column <name>_sd, when present, weights the fit.

Diffusion timescales inform, and do not replace, hazard assessment, which
belongs to the responsible observatory and local authorities.
"""

_PLOT_EXT = (".png", ".svg", ".pdf")


def configure(parser):
    parser.add_argument("profile", metavar="PROFILE", help="profile table (CSV/TSV/XLSX) with distance_um")
    parser.add_argument("--element", required=True,
                        help="Mg, Sr, Ba, FeMg or Ti; several (e.g. Mg,Sr) are fitted separately and compared "
                             "where they date the same boundary")
    parser.add_argument("--mineral", required=True,
                        help="plagioclase, alkali-feldspar, olivine, clinopyroxene or quartz")
    parser.add_argument("--temperature-c", type=float, required=True, metavar="T",
                        help="storage temperature, °C")
    parser.add_argument("--temperature-sd-c", type=float, default=None, metavar="S",
                        help="1-sigma uncertainty of the temperature, °C (default: a stated 20 °C, with a "
                             "warning; give 0 to leave temperature out of the budget)")
    budget = parser.add_argument_group("uncertainty budget (docs/fitting-and-uncertainty.md)")
    budget.add_argument("--beam-sd-um", type=float, metavar="S",
                        help="1-sigma of the spot diameter, µm (default: 20%% of --beam-um, named in the output)")
    budget.add_argument("--growth-width-sd-um", type=float, metavar="S",
                        help="sd of the half-normal width the boundary had when it grew, µm (default 0.5; 0: off)")
    budget.add_argument("--no-section-obliquity", action="store_true",
                        help="do not draw the unknown section obliquity from the stated default distribution "
                             "(half-normal, sd 20°, cut at 60°) when no --obliquity-deg is given")
    budget.add_argument("--fo2-buffer", metavar="BUFFER",
                        help="olivine: fO2 follows this buffer (QFM, NNO, IW) with temperature, in the fit and "
                             "in every temperature draw")
    budget.add_argument("--fo2-delta-log", type=float, default=0.0, metavar="D",
                        help="log10 units above the --fo2-buffer (e.g. 1 for ΔQFM = +1; default 0)")
    budget.add_argument("--partition-a-sd", type=float, metavar="J",
                        help="1-sigma of the partition parameter A, J/mol (default: 10%% of |A|, named in the output)")
    parser.add_argument("--boundary-um", type=float, nargs="+", metavar="X",
                        help="boundary position(s), µm from the rim; each is fitted separately and held "
                             "fixed (default: the recharge-like steps the zoning analysis finds, as campaigns "
                             "do, else the largest step; steps left undated are listed)")
    parser.add_argument("--boundary-window-um", type=float, metavar="W",
                        help="fit each boundary position within ±W µm instead of holding it fixed")
    parser.add_argument("--beam-um", type=float, metavar="W",
                        help="spot diameter in µm: the full width at half maximum of a Gaussian beam, "
                             "or the full width of a square spot with --beam-shape square")
    parser.add_argument("--beam-shape", choices=("gaussian", "square"), default="gaussian",
                        help="spot profile: gaussian (electron beam) or square (LA-ICP-MS); default gaussian")
    parser.add_argument("--law", metavar="ID", help="diffusion law id (see 'zoneprofile laws'; default per element)")
    parser.add_argument("--partition", default="bindeman1998", metavar="MODEL",
                        help="plagioclase-melt partition model (default bindeman1998)")
    parser.add_argument("--draws", type=int, default=1000, metavar="N", help="Monte Carlo draws (default 1000)")
    parser.add_argument("--seed", type=int, default=0, metavar="N", help="random seed (default 0)")
    parser.add_argument("--fo2-pa", type=float, metavar="P", help="oxygen fugacity, Pa (olivine Fe-Mg)")
    parser.add_argument("--pressure-mpa", type=float, metavar="P", help="pressure, MPa (default: the law's 0.1 MPa)")
    parser.add_argument("--direction", metavar="DIR",
                        help="direction of the traverse in the crystal: an axis ([100], [010], [001]) or EBSD "
                             "angles 'α,β,γ' (degrees to [100], [010], [001]). Olivine without it: orientation "
                             "unknown, taken as uniform over the sphere (a wider interval and a warning), never "
                             "silently [001]")
    parser.add_argument("--an-from", metavar="TABLE",
                        help="read An from this second table (e.g. a microprobe traverse of the same line)")
    parser.add_argument("--an", type=float, metavar="MOL",
                        help="An (mol%%) at every point, for a profile without An known to be unzoned in An")
    parser.add_argument("--offset-um", type=float, default=0.0, metavar="D",
                        help="added to the distances of --an-from to align it with PROFILE (default 0)")
    parser.add_argument("--an-beam-um", type=float, metavar="W",
                        help="spot diameter (Gaussian FWHM) of the An analyses (default: --beam-um when An is "
                             "in PROFILE, none for --an-from)")
    parser.add_argument("--obliquity-deg", type=float, metavar="PSI",
                        help="angle between the traverse and the normal of the boundary trace in the section")
    parser.add_argument("--obliquity-sd-deg", type=float, default=0.0, metavar="S",
                        help="1-sigma of --obliquity-deg (default 0)")
    parser.add_argument("--dip-deg", type=float, metavar="PHI",
                        help="angle between the boundary plane's normal and the section normal (default 90)")
    parser.add_argument("--rim", choices=("auto", "open", "closed"), default="auto",
                        help="rim held in equilibrium with the outer melt (open) or zero flux (closed); "
                             "auto (default): whichever fits the data better where the diffused zone reaches "
                             "the rim")
    parser.add_argument("--geometry", choices=("planar", "cylinder", "sphere"), default="planar",
                        help="crystal geometry (default planar); curved ones need --radius-um")
    parser.add_argument("--radius-um", type=float, metavar="R", help="crystal radius for cylinder/sphere, µm")
    parser.add_argument("--cooling-c-per-day", type=float, metavar="R",
                        help="linear cooling from --temperature-c at R °C per day (non-isothermal)")
    parser.add_argument("--path", metavar="TABLE",
                        help="temperature-time path table with columns time_days, temperature_c (non-isothermal)")
    parser.add_argument("--include-flagged", action="store_true", help="keep points whose qc is not 'ok'")
    parser.add_argument("-o", "--output", required=True, metavar="FIT.json", help="results (JSON)")
    parser.add_argument("--plot", metavar="FIG", help="figure of data, fit, initial profile and band (.png/.svg/.pdf): "
                        "the report's drawing of these boundaries")
    add_figure_width(parser)
    parser.add_argument("--force", action="store_true", help="overwrite existing outputs")
    parser.add_argument("--crystal", action="store_true",
                        help="date all --boundary-um boundaries in one whole-crystal model (zones grown event by "
                             "event; --element may list several elements, e.g. Mg,Sr, fitted with shared ages)")


def _read_path_table(path):
    from zoneprofile._validation import InputError
    from zoneprofile.diffusion.paths import TablePath
    from zoneprofile.io.profile import _to_float, read_text_table

    frame, _ = read_text_table(path, header_contains=("time_days",))
    for col in ("time_days", "temperature_c"):
        if col not in frame.columns:
            raise InputError(f"no '{col}' column in the temperature path table", path=path)
    t = _to_float(frame, "time_days", path, allow_blank=False)
    temp = _to_float(frame, "temperature_c", path, allow_blank=False)
    try:
        return TablePath(tuple(t), tuple(temp))
    except InputError as exc:
        raise InputError(exc.message, path=path) from None


def run(args):
    if getattr(args, "crystal", False):
        from zoneprofile.cli._fit_crystal import run_crystal

        return run_crystal(args)
    names = [e.strip() for e in str(args.element).split(",") if e.strip()]
    if len(names) > 1:  # separate fits of each element, compared at shared boundaries
        from zoneprofile.cli._fit_steps import run_several

        return run_several(args, names, _run_single)
    return _run_single(args)


def _run_single(args, _collect=None):
    from pathlib import Path

    from zoneprofile import __version__
    from zoneprofile._output import check_outputs, write_bytes, write_json
    from zoneprofile._validation import InputError, require_file, require_in_range, require_positive
    from zoneprofile.diffusion.laws import ELEMENTS, MINERALS, normalise_element, normalise_mineral
    from zoneprofile.minerals.registry import needs_an as an_needed
    from zoneprofile._limits import check_limit

    element = normalise_element(args.element)
    mineral = normalise_mineral(args.mineral)
    if element not in ELEMENTS:
        raise InputError(f"unknown element '{args.element}'; choose one of: {', '.join(ELEMENTS)}")
    if mineral not in MINERALS:
        raise InputError(f"unknown mineral '{args.mineral}'; choose one of: {', '.join(MINERALS)}")
    check_limit("temperature_c", args.temperature_c, "--temperature-c")  # zoneprofile/_limits.py
    if args.temperature_sd_c is not None:
        require_positive(args.temperature_sd_c, "--temperature-sd-c", allow_zero=True)
    for name in ("beam_sd_um", "growth_width_sd_um", "partition_a_sd"):
        if getattr(args, name) is not None:
            require_positive(getattr(args, name), "--" + name.replace("_", "-"), allow_zero=True)
    if args.fo2_buffer is not None:
        from zoneprofile.diffusion.laws.buffers import log10_fo2_buffer_pa

        log10_fo2_buffer_pa(args.fo2_buffer, 1000.0)
        if args.fo2_pa is not None:
            raise InputError("give either --fo2-pa or --fo2-buffer, not both")
    check_limit("draws", args.draws, "--draws")  # zoneprofile/_limits.py
    for name in ("beam_um", "an_beam_um", "radius_um", "boundary_window_um"):
        value = getattr(args, name)
        if value is not None:
            require_positive(value, "--" + name.replace("_", "-"), allow_zero=name != "radius_um")
    if args.fo2_pa is not None:
        require_positive(args.fo2_pa, "--fo2-pa")
    if args.pressure_mpa is not None:
        require_positive(args.pressure_mpa, "--pressure-mpa")
    if args.geometry != "planar" and args.radius_um is None:
        raise InputError(f"--geometry {args.geometry} needs --radius-um")
    if args.cooling_c_per_day is not None and args.path is not None:
        raise InputError("give either --cooling-c-per-day or --path, not both")
    if args.obliquity_deg is not None:
        require_in_range(args.obliquity_deg, "--obliquity-deg", 0.0, 89.0, unit="°")
    if args.dip_deg is not None:
        require_in_range(args.dip_deg, "--dip-deg", 1.0, 90.0, unit="°")
    plot = args.plot
    if plot is not None and Path(plot).suffix.lower() not in _PLOT_EXT:
        raise InputError(f"unsupported figure type '{Path(plot).suffix}'; use {', '.join(_PLOT_EXT)}", path=plot)
    out = Path(args.output)
    if out.suffix.lower() != ".json":
        raise InputError("the output must be a .json file", path=out)
    check_outputs(out, plot, force=args.force)
    profile_path = require_file(args.profile, what="profile table")

    import hashlib

    import numpy as np

    from zoneprofile.diffusion import LinearCooling, fit_boundary
    from zoneprofile.io.profile import read_profile

    from zoneprofile.cli._fit_inputs import blank_note, censored_note, value_source

    header = _header(profile_path)
    ppm_col = None
    factor = None
    input_notes = []
    try:
        col = _value_column(header, element, mineral, profile_path)
    except InputError as exc:
        # no ppm column: a microprobe table may give the oxide in wt% instead
        from zoneprofile.diffusion.fitting import ELEMENT_COLUMNS

        ppm_col = ELEMENT_COLUMNS.get((element, mineral))
        source, factor, note = value_source(header, element, ppm_col) if ppm_col else (None, None, None)
        if factor is None:
            if ppm_col and element in ("Mg", "Sr", "Ba"):
                raise InputError(f"{exc.message}; a column of the oxide in wt% ({element}O) is converted too",
                                 path=profile_path) from None
            raise
        col = source
        input_notes.append(note)
    needs_an = an_needed(element, mineral)
    optional = [f"{col}_sd"]
    if args.an is not None:
        require_in_range(args.an, "--an", 0.0, 100.0, unit="mol%")
        if args.an_from is not None:
            raise InputError("give either --an or --an-from, not both")
    if needs_an and args.an_from is None and args.an is None:
        if "An" not in header:
            raise InputError(
                f"no 'An' column: {element} in plagioclase needs An along the profile; add an An column, "
                "give --an-from TABLE, or --an MOL if the crystal is unzoned in An", path=profile_path)
        optional.append("An")
    frame = read_profile(profile_path, columns=(col,), optional=optional, include_flagged=args.include_flagged,
                         allow_blank=(col,), allow_censored=(col,))
    censored = frame.pop(f"{col}_censored").to_numpy(bool)
    blank = ~np.isfinite(frame[col].to_numpy(float))
    if censored.any():
        input_notes.append(censored_note(int(censored.sum()), col))
    if (blank & ~censored).any():
        input_notes.append(blank_note(int((blank & ~censored).sum()), col))
    if blank.any():
        frame = frame[~blank].reset_index(drop=True)
    if col == "X_Fe":
        _check_column(frame, col, profile_path, low=0.0, high=1.0, what="X_Fe")
        values = 100.0 * (1.0 - frame[col].to_numpy(float))
    elif col == "Fo":
        values = _check_column(frame, col, profile_path, low=0.0, high=100.0, what="Fo (mol%)")
    else:
        values = _check_column(frame, col, profile_path, what="concentration")
    if factor is not None:
        values = values * factor
    distance = frame["distance_um"].to_numpy(float)
    value_sd = read_sd(frame, col, profile_path, input_notes)
    if value_sd is not None:
        if col == "X_Fe":
            value_sd = 100.0 * value_sd
        if factor is not None:
            value_sd = value_sd * factor
    an = an_x = None
    an_beam = args.an_beam_um
    an_source = None
    if needs_an:
        an, an_x, an_beam, an_source = read_an(args, frame, profile_path, distance)
    path_obj = None
    if args.cooling_c_per_day is not None:
        require_positive(args.cooling_c_per_day, "--cooling-c-per-day", allow_zero=True)
        path_obj = LinearCooling(args.temperature_c, args.cooling_c_per_day)
    elif args.path is not None:
        path_obj = _read_path_table(require_file(args.path, what="temperature path table"))

    boundaries = sorted(args.boundary_um) if args.boundary_um else [None]
    for b in boundaries:
        if b is not None and not distance[0] <= b <= distance[-1]:
            raise InputError(f"boundary {b:g} µm lies outside the profile ({distance[0]:g}–{distance[-1]:g} µm)",
                             path=profile_path, column="distance_um")
    windows = [args.boundary_window_um] * len(boundaries)
    positions = [b for b in boundaries if b is not None]
    plan = None
    if not args.boundary_um:
        # without positions: the recharge-like steps the zoning analysis finds, as campaigns (cli/_fit_steps.py)
        from zoneprofile.cli._fit_steps import plan_steps

        plan = plan_steps(distance, values, mineral=mineral, value_name=ppm_col or (col if col != "X_Fe" else "Fo"),
                          an=an, an_aligned=an is not None and an_source is None and args.an is None,
                          temperature_c=args.temperature_c, window_um=args.boundary_window_um)
        boundaries = [b for b, _ in plan.dated]
        windows = [w for _, w in plan.dated]
        positions = plan.positions
        input_notes = input_notes + plan.notes
    fits = []
    for k, b in enumerate(boundaries):
        # the other boundaries given (or steps found) are this one's neighbours: the fit keeps them (and any
        # other step it finds) outside its window, or says the boundary cannot be dated alone
        neighbours = [o for o in positions if b is not None and abs(o - b) > 1e-9] or None
        try:
            result = fit_boundary(
                distance, values, element=element, mineral=mineral, temperature_c=args.temperature_c,
                temperature_sd_c=args.temperature_sd_c, an=an, an_distance_um=None if an_source is None else an_x,
                an_beam_um=an_beam, boundary_um=b, boundary_window_um=windows[k],
                neighbours_um=neighbours, beam_um=args.beam_um, beam_shape=args.beam_shape, law=args.law,
                partition=args.partition, draws=args.draws, seed=args.seed + k,
                obliquity_deg=args.obliquity_deg, obliquity_sd_deg=args.obliquity_sd_deg, dip_deg=args.dip_deg,
                value_sd=value_sd, fo2_pa=args.fo2_pa, pressure_mpa=args.pressure_mpa,
                direction=args.direction, rim=args.rim, geometry=args.geometry, radius_um=args.radius_um,
                path=path_obj, value_name=ppm_col or (col if col != "X_Fe" else "Fo"), budget=_budget_options(args),
            )
            result.warnings = input_notes + result.warnings
            if plan is not None and b is None:
                from zoneprofile.cli._fit_steps import left_after

                left = left_after(plan, [result.position_um])
                if left:
                    result.warnings.insert(len(input_notes), left)
        except InputError as exc:
            if exc.path is None:
                raise InputError(exc.message, path=profile_path, row=exc.row, column=exc.column,
                                 text=exc.text) from None
            raise
        fits.append(result)

    from zoneprofile.cli._fit_notes import print_shared, take_shared

    shared = [] if _collect is not None else take_shared(fits)  # several elements: taken over all of them
    document = {
        "fits": [r.to_dict() for r in fits],
        "warnings": shared,
        "input": {
            "profile": str(profile_path),
            "sha256": hashlib.sha256(profile_path.read_bytes()).hexdigest(),
            "value_column": col,
            "an_from": an_source,
            "points": int(distance.size),
            "options": {k: v for k, v in vars(args).items() if not k.startswith("_") and k != "force"},
        },
        "software": {"name": "zoneprofile", "version": __version__},
        "caution": ("Diffusion timescales inform, and do not replace, hazard assessment, which belongs to "
                    "the responsible observatory and local authorities."),
    }
    if _collect is not None:  # several elements: the caller compares, writes and prints
        _collect.append((fits, document))
        return 0
    figure = None
    if plot is not None:
        from zoneprofile.diffusion._plot import fit_figure

        figure = fit_figure(fits, fmt=Path(plot).suffix.lower()[1:], value_sd=value_sd, distance_um=distance,
                            width=getattr(args, "figure_width", "double"))
    write_json(out, document)
    if figure is not None:
        write_bytes(plot, figure)
    print_shared(shared)
    for r in fits:
        print(r.report())
    return 0


def _budget_options(args):
    """Budget settings of one run: all fits made with one --seed share their temperature draws."""
    from zoneprofile.diffusion._budget import BudgetOptions, cli_shared_seed

    return BudgetOptions(shared_seed=cli_shared_seed(args.seed), beam_sd_um=args.beam_sd_um,
                         growth_width_sd_um=args.growth_width_sd_um,
                         section_obliquity=not args.no_section_obliquity, fo2_buffer=args.fo2_buffer,
                         fo2_delta_log=args.fo2_delta_log, partition_a_sd_j_mol=args.partition_a_sd)
