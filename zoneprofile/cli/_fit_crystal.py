"""`zoneprofile fit --crystal`: every recharge boundary of one traverse in one model.

Called by :mod:`zoneprofile.cli.fit` when ``--crystal`` is given. ``--element``
may then name several elements separated by commas (e.g. ``Mg,Sr``), fitted
jointly with shared ages; ``--boundary-um`` lists the recharge boundaries
(any order: they are dated innermost = oldest first).
"""

from __future__ import annotations

#: options of the single-boundary fit the whole-crystal model does not take
_UNSUPPORTED = {
    "cooling_c_per_day": "--cooling-c-per-day",
    "path": "--path",
    "dip_deg": "--dip-deg",
    "radius_um": "--radius-um",
    "plot": "--plot",
}


def run_crystal(args):
    import hashlib
    from pathlib import Path

    import numpy as np

    from zoneprofile import __version__
    from zoneprofile._output import check_outputs, write_json
    from zoneprofile._validation import InputError, require_file, require_in_range, require_positive
    from zoneprofile.cli._columns import _check_column, _header, _value_column, read_an, read_sd
    from zoneprofile.cli._fit_inputs import blank_note, censored_note
    from zoneprofile.diffusion.crystal import fit_crystal
    from zoneprofile.diffusion.laws import ELEMENTS, MINERALS, normalise_element, normalise_mineral
    from zoneprofile.io.profile import read_profile
    from zoneprofile.minerals.registry import needs_an as an_needed
    from zoneprofile._limits import check_limit

    for name, flag in _UNSUPPORTED.items():
        if getattr(args, name, None) is not None:
            raise InputError(f"{flag} is not available with --crystal (the whole-crystal model is isothermal, "
                             "planar and has no figure yet); leave it out or fit boundaries one by one")
    if args.geometry != "planar":
        raise InputError("--geometry must be planar with --crystal")
    if args.obliquity_sd_deg:
        raise InputError("--obliquity-sd-deg is not available with --crystal (an unmeasured section's obliquity "
                         "is drawn by default); give --obliquity-deg for a measured angle")
    mineral = normalise_mineral(args.mineral)
    if mineral not in MINERALS:
        raise InputError(f"unknown mineral '{args.mineral}'; choose one of: {', '.join(MINERALS)}")
    elements = []
    for raw in str(args.element).split(","):
        el = normalise_element(raw.strip())
        if el not in ELEMENTS:
            raise InputError(f"unknown element '{raw.strip()}'; choose one of: {', '.join(ELEMENTS)}")
        if el in elements:
            raise InputError(f"element {el} is named twice in --element")
        elements.append(el)
    check_limit("temperature_c", args.temperature_c, "--temperature-c")  # zoneprofile/_limits.py
    require_positive(args.temperature_sd_c, "--temperature-sd-c", allow_zero=True)
    check_limit("draws", args.draws, "--draws")  # zoneprofile/_limits.py
    for name in ("beam_um", "an_beam_um", "boundary_window_um"):
        value = getattr(args, name)
        if value is not None:
            require_positive(value, "--" + name.replace("_", "-"), allow_zero=True)
    if args.obliquity_deg is not None:
        require_in_range(args.obliquity_deg, "--obliquity-deg", 0.0, 89.0, unit="°")
    if not args.boundary_um:
        raise InputError("--crystal needs the recharge boundaries: give their positions with --boundary-um "
                         "(µm from the rim; see 'zoneprofile zones' to find them)")
    out = Path(args.output)
    if out.suffix.lower() != ".json":
        raise InputError("the output must be a .json file", path=out)
    check_outputs(out, None, force=args.force)
    profile_path = require_file(args.profile, what="profile table")

    header = _header(profile_path)
    columns = {el: _value_column(header, el, mineral, profile_path) for el in elements}
    needs_an = any(an_needed(el, mineral) for el in elements)
    optional = [f"{c}_sd" for c in columns.values()]
    if args.an is not None:
        require_in_range(args.an, "--an", 0.0, 100.0, unit="mol%")
        if args.an_from is not None:
            raise InputError("give either --an or --an-from, not both")
    if needs_an and args.an_from is None and args.an is None:
        if "An" not in header:
            raise InputError("no 'An' column: trace elements in plagioclase need An along the profile; add an An "
                             "column, give --an-from TABLE, or --an MOL if the crystal is unzoned in An",
                             path=profile_path)
        optional.append("An")
    value_cols = tuple(dict.fromkeys(columns.values()))
    frame = read_profile(profile_path, columns=value_cols, optional=optional, include_flagged=args.include_flagged,
                         allow_blank=value_cols, allow_censored=value_cols)
    input_notes = []
    # below-detection and blank values are left out element by element and counted, as fit does
    for col in value_cols:
        censored = frame.pop(f"{col}_censored").to_numpy(bool)
        blank = ~np.isfinite(frame[col].to_numpy(float)) & ~censored
        input_notes += [n for n in (censored_note(int(censored.sum()), col), blank_note(int(blank.sum()), col)) if n]
    measured = np.column_stack([np.isfinite(frame[c].to_numpy(float)) for c in value_cols])
    frame = frame[measured.any(axis=1)].reset_index(drop=True)  # a row with no value at all serves nothing
    distance = frame["distance_um"].to_numpy(float)
    profiles = {}
    for el, col in columns.items():
        sub = frame[np.isfinite(frame[col].to_numpy(float))].reset_index(drop=True)
        if col == "X_Fe":
            _check_column(sub, col, profile_path, low=0.0, high=1.0, what="X_Fe")
            values = 100.0 * (1.0 - sub[col].to_numpy(float))
        else:
            values = _check_column(sub, col, profile_path, what="concentration")
        sd = read_sd(sub, col, profile_path, input_notes)
        profiles[el] = {"distance_um": sub["distance_um"].to_numpy(float), "value": values, "sd": sd,
                        "beam_um": args.beam_um, "beam_shape": args.beam_shape}
    an = an_x = None
    an_beam = args.an_beam_um
    an_source = None
    if needs_an:
        an, an_x, an_beam, an_source = read_an(args, frame, profile_path, distance)
    positions = sorted((float(b) for b in args.boundary_um), reverse=True)
    for b in positions:
        if not distance[0] < b < distance[-1]:
            raise InputError(f"boundary {b:g} µm lies outside the profile ({distance[0]:g}–{distance[-1]:g} µm)",
                             path=profile_path, column="distance_um")
    if len(set(positions)) != len(positions):
        raise InputError("a boundary position is given twice in --boundary-um")
    rim = "open" if args.rim == "auto" else args.rim
    an_splits = None
    if an is not None and np.ptp(an) > 0:
        an_splits = undated_an_steps(an_x, an, positions, input_notes)
    laws = None
    if args.law:
        from zoneprofile.diffusion.laws import get_law

        law = get_law(args.law)
        if law.element not in elements:
            raise InputError(f"--law {law.id} is for {law.element}, which is not among --element {args.element}")
        laws = {law.element: law.id}  # the other elements keep their default laws
    try:
        result = fit_crystal(
            profiles, mineral=mineral, positions_um=positions, temperature_c=args.temperature_c,
            temperature_sd_c=args.temperature_sd_c, an_distance_um=an_x, an=an, an_beam_um=an_beam, rim=rim,
            laws=laws, partition=args.partition,
            draws=args.draws, seed=args.seed, obliquity="section" if args.obliquity_deg is None else args.obliquity_deg,
            position_window_um=args.boundary_window_um, fo2_pa=args.fo2_pa, pressure_mpa=args.pressure_mpa,
            an_splits_um=an_splits)
    except InputError as exc:
        if exc.path is None:
            raise InputError(exc.message, path=profile_path, row=exc.row, column=exc.column, text=exc.text) from None
        raise
    record = result.to_record()
    record["warnings"][:0] = input_notes
    if args.rim == "auto":
        record["warnings"].append("the rim was taken as open (held in equilibrium with each stage's melt); "
                                  "give --rim closed if the rim did not exchange with the melt")
    document = {
        "crystal_model": record,
        "input": {
            "profile": str(profile_path),
            "sha256": hashlib.sha256(profile_path.read_bytes()).hexdigest(),
            "value_columns": columns,
            "an_from": an_source,
            "points": int(distance.size),
            "options": {k: v for k, v in vars(args).items() if not k.startswith("_") and k != "force"},
        },
        "software": {"name": "zoneprofile", "version": __version__},
        "caution": ("Diffusion timescales inform, and do not replace, hazard assessment, which belongs to "
                    "the responsible observatory and local authorities."),
    }
    write_json(out, document)
    print(result.report())
    return 0


def undated_an_steps(an_x, an, positions, notes):
    """The An steps the zoning analysis finds that are not among the given boundaries (farther than the
    campaign's matching distance), as ``fit_crystal(an_splits_um=...)`` takes them: the frozen An steps
    there too, as a campaign does with its zoning's undated steps (docs/whole-crystal-model.md)."""
    from zoneprofile.campaign._boundaries import MATCH_UM
    from zoneprofile.zoning import analyse_zoning

    steps = analyse_zoning(an_x, an, column="An").steps
    found = [float(s.position_um) for s in steps
             if all(abs(float(s.position_um) - p) > MATCH_UM for p in positions)]
    if found:
        where = ", ".join(f"{v:.1f}" for v in sorted(found))
        notes.append(f"An steps at {where} µm (found by the zoning analysis, not among --boundary-um) are taken "
                     "as steps of the frozen An without a recharge: the partitioning steps there, the melt does "
                     "not; give them in --boundary-um to date them as recharges")
    return found or None
