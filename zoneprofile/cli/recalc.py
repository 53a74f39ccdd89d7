"""`zoneprofile recalc`: a table of spot analyses -> a composition profile."""

from __future__ import annotations

from zoneprofile.minerals.registry import recalculated_minerals

DESCRIPTION = """\
Recalculate microprobe spot analyses along a traverse into mineral formulae
and a composition profile measured from the rim.

Reads CSV, TSV, semicolon-separated (decimal commas), whitespace-aligned text or
.xlsx tables as exported by the instrument: title lines above the header, a unit
row below it, oxide columns in any usual spelling (SiO2, SiO2 (wt%), sio2,
FeO*, FeOt ...), labels and comments, stage X/Y or a distance column, a Total
column, and below-detection marks (<0.03, bdl, b.d.l., n.d., -, negatives),
which are counted as 0 in the formula and listed in the 'censored' column.
Trace-element columns in ppm (Sr, Sr_ppm, Sr88, 88Sr) pass through as <El>_ppm.

For every analysis it writes the oxide total, cations per formula unit
(feldspar 8 O with Fe as Fe3+; olivine 4 O; pyroxene 6 O with Fe3+ by Droop
1987), An/Ab/Or, Fo, or Wo/En/Fs and Mg#, the species, and a 'qc' column that
says 'ok' or why the point is suspect (oxide total, T-site, M-site, cation sum,
'not feldspar?' ...). Flagged points keep their row; later steps leave them
out unless asked. Distance from the rim (distance_um) is the projection of the
stage positions on the best-fit line through them (the largest sideways
offset is reported); the rim is the first row unless --rim end.

examples:
  zoneprofile recalc spots.csv -o profile.csv
  zoneprofile recalc session.xlsx --sheet "crystal 4" --rim end -o c4.csv
  zoneprofile recalc ol.tsv --mineral olivine --stage-units mm -o ol.json
  zoneprofile recalc plag.csv --total-range 98,102 --qc m_site=0.93,1.07 -o p.csv
"""


def _pair(text: str, name: str):
    from zoneprofile._validation import InputError

    parts = [p for p in str(text).replace(";", ",").split(",") if p.strip()]
    try:
        low, high = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"{name} needs two numbers LOW,HIGH", text=text) from None
    return low, high


#: from the light mineral table, so that 'zoneprofile --help' does not import
#: pandas; a test checks it against zoneprofile.minerals.MINERALS
MINERAL_NAMES = recalculated_minerals()


def configure(parser):
    parser.add_argument("table", metavar="TABLE", help="spot analyses: .csv, .tsv, .txt or .xlsx")
    parser.add_argument("-o", "--out", required=True, metavar="OUT",
                        help="output table: .csv, .tsv, .xlsx or .json (by extension)")
    parser.add_argument("--mineral", default="plagioclase", metavar="NAME",
                        help=f"mineral to recalculate: {', '.join(MINERAL_NAMES)} (default: plagioclase)")
    parser.add_argument("--rim", default="start", metavar="start|end",
                        help="where the rim is in the table: first row (start, default) or last row (end)")
    parser.add_argument("--stage-units", default=None, metavar="um|mm",
                        help="units of stage X/Y; default: from the header, else inferred from the median step")
    parser.add_argument("--sheet", default=None, metavar="NAME",
                        help=".xlsx sheet name (default: the first sheet with oxide columns)")
    parser.add_argument("--step-um", type=str, default=None, metavar="S",
                        help="point spacing in µm, for tables with neither stage X/Y nor a distance column")
    parser.add_argument("--sample", default=None, help="sample name (default: a Sample column or the file name)")
    parser.add_argument("--crystal", default=None, help="crystal name (default: a Crystal column or the file name); when a Crystal column "
                             "holds several crystals, the one whose rows to read")
    parser.add_argument("--beam-um", type=str, default=None, metavar="W", help="beam (spot) diameter in µm, kept as metadata")
    parser.add_argument("--total-range", default=None, metavar="LOW,HIGH",
                        help="accepted oxide total in wt%% (default 98.5,101.5)")
    parser.add_argument("--qc", action="append", default=[], metavar="KEY=LOW,HIGH",
                        help="override a QC window or limit, e.g. m_site=0.93,1.07 or max_or_plagioclase=20; "
                             "keys: feldspar cations, t_site, m_site, al_vs_an, max_mafic, max_or_plagioclase, "
                             "max_an_alkali; olivine si, cations; pyroxene cations_fe2, si (defaults in "
                             "docs/recalculation.md); repeatable")
    parser.add_argument("--below-detection", default="zero", metavar="zero|flag|raise",
                        help="below-detection oxide cells: count as 0 and list them (zero, default); "
                             "also flag points where a needed oxide is below detection (flag); refuse the file (raise)")
    parser.add_argument("--with-ba-sr", action="store_true",
                        help="feldspar: add Ba and Sr to the An/Ab/Or denominator")
    parser.add_argument("--fo-with-mn", action="store_true", help="olivine: add Mn to the Fo denominator")
    parser.add_argument("--force", action="store_true", help="overwrite OUT if it exists")


def _qc_overrides(args) -> dict:
    from zoneprofile._validation import InputError

    qc = {}
    if args.total_range is not None:
        qc["total_wt"] = _pair(args.total_range, "--total-range")
    for item in args.qc:
        key, sep, value = str(item).partition("=")
        if not sep or not key.strip():
            raise InputError("--qc needs KEY=VALUE, e.g. m_site=0.93,1.07", text=item)
        parts = [p for p in value.split(",") if p.strip()]
        if len(parts) == 2:
            qc[key.strip()] = _pair(value, f"--qc {key.strip()}")
        else:
            qc[key.strip()] = value.strip()
    return qc


def _summary(tr, out) -> str:
    import numpy as np

    t = tr.table
    n = len(t)
    flagged = t[t["qc"] != "ok"]
    kinds: dict[str, int] = {}
    for q in flagged["qc"]:
        for reason in str(q).split("; "):
            if reason.startswith("not "):
                word = reason.split("?")[0] + "?"
            else:
                word = reason.split(" ")[0]
                word = {"Al": "Al vs An", "same": "same position"}.get(word, word)
            kinds[word] = kinds.get(word, 0) + 1
    lines = [f"read {n} analyses from {tr.source} ({tr.mineral}); distance from {tr.position_from}"
             + (f", largest offset from the line {tr.max_offset_um:.2f} µm" if tr.position_from == "stage X/Y" else "")]
    flag_text = ", ".join(f"{k} {v}" for k, v in sorted(kinds.items()))
    lines.append(f"flagged {len(flagged)} of {n}" + (f" ({flag_text})" if flag_text else ""))
    good = tr.good()
    from zoneprofile.minerals import get_mineral

    show = get_mineral(tr.mineral).main_index
    vals = good[show].to_numpy(dtype=float) if len(good) else np.array([])
    vals = vals[np.isfinite(vals)]
    if vals.size:
        unit = "" if show == "Mg_number" else " mol%"
        label = "Mg#" if show == "Mg_number" else show
        lines.append(f"{label} {vals.min():.1f}-{vals.max():.1f}{unit} over {vals.size} good points, "
                     f"{good['distance_um'].iloc[0]:.1f}-{good['distance_um'].iloc[-1]:.1f} µm from the rim")
    for note in tr.notes:
        lines.append(f"note: {note}")
    lines.append(f"wrote {out}")
    return "\n".join("zoneprofile recalc: " + ln for ln in lines) + "\n"


def run(args) -> int:
    import sys
    from pathlib import Path

    from zoneprofile._output import check_outputs, write_json, write_table
    from zoneprofile._validation import InputError, require_file, require_positive
    from zoneprofile.minerals import get_mineral
    from zoneprofile.traverse import read_traverse

    out = Path(args.out)
    if out.suffix.lower() not in (".csv", ".tsv", ".xlsx", ".json"):
        raise InputError("unsupported output extension; use .csv, .tsv, .xlsx or .json", path=out)
    m = get_mineral(args.mineral)
    require_file(args.table, what="table")
    if Path(args.table).resolve() == out.resolve():
        raise InputError("the output would overwrite the input table; choose another name", path=out)
    check_outputs(out, force=args.force)
    options = {}
    if args.with_ba_sr:
        if "with_ba_sr" not in m.options:
            raise InputError(f"--with-ba-sr applies to feldspar, not {m.name}", column="--with-ba-sr")
        options["with_ba_sr"] = True
    if args.fo_with_mn:
        if "fo_with_mn" not in m.options:
            raise InputError(f"--fo-with-mn applies to olivine, not {m.name}", column="--fo-with-mn")
        options["fo_with_mn"] = True
    step = None if args.step_um is None else require_positive(args.step_um, "--step-um")
    beam = None if args.beam_um is None else require_positive(args.beam_um, "--beam-um")
    tr = read_traverse(
        args.table,
        mineral=m.name,
        rim=args.rim,
        stage_units=args.stage_units,
        sheet=args.sheet,
        sample=args.sample,
        crystal=args.crystal,
        beam_um=beam,
        qc=_qc_overrides(args),
        below_detection=args.below_detection,
        step_um=step,
        **options,
    )
    table = tr.output_table()
    if out.suffix.lower() == ".json":
        meta = {
            "sample": tr.sample,
            "crystal": tr.crystal,
            "mineral": tr.mineral,
            "source": tr.source,
            "sha256": tr.sha256,
            "beam_um": tr.beam_um,
            "distance_from": tr.position_from,
            "max_offset_um": tr.max_offset_um,
            "notes": tr.notes,
            "points": table.astype(object).where(table.notna(), None).to_dict(orient="records"),
        }
        write_json(out, meta)
    else:
        write_table(out, table)
    sys.stderr.write(_summary(tr, out))
    return 0
