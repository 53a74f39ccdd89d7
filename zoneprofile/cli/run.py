"""`zoneprofile run`: a whole campaign, from the campaign file to the report."""

from __future__ import annotations

import sys

DESCRIPTION = """\
Run every crystal of a campaign file (TOML) through the whole job: read and
recalculate the traverses, calibrate the maps, read the zoning, fit diffusion
models to the recharge boundaries, and date them; then write the report.

Output folder: report.html (open it in a browser), results.json, tables/*.csv
(ready for a supplement) and figures/ (PNG and SVG).

Each crystal's result is kept in a cache folder beside the campaign file
(.zoneprofile-cache/ unless the file says otherwise): a second run recomputes
only the crystals whose input files or settings changed, and a run that was
interrupted goes on where it stopped.

Exit code 0 when the report was written (failed crystals are counted in the
summary line and listed); 2 for a bad campaign or command line, and when
every crystal failed (the report with the reasons is still written).

Diffusion timescales inform, and do not replace, hazard assessment, which
belongs to the responsible observatory and local authorities.

Example:
  zoneprofile run campaign.toml --out results --workers 2
"""


def configure(parser):
    parser.add_argument("campaign", metavar="CAMPAIGN.toml", help="the campaign file")
    parser.add_argument("--out", required=True, metavar="DIR", help="output folder (must not exist unless --force)")
    parser.add_argument("--workers", type=int, default=1, metavar="N",
                        help="crystals computed in parallel by N local processes (default 1)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run the crystals on a Dask cluster: a scheduler address (tcp://host:8786) or "
                             "'local-cluster' to start one here with --workers workers (needs the "
                             "'distributed' extra)")
    parser.add_argument("--force", action="store_true", help="replace an existing output folder")
    parser.add_argument("--allow-outside", action="store_true",
                        help="accept input paths outside the campaign file's folder")
    parser.add_argument("--no-cache", action="store_true",
                        help="recompute every crystal and leave the cache untouched")
    parser.add_argument("--figures", default="png,svg", metavar="FORMATS",
                        help="figure formats, comma-separated from png, svg, pdf (default png,svg)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar and no summary on stderr")
    from zoneprofile._limits import CHOICES

    parser.add_argument("--figure-width", choices=CHOICES["figure_width"][0], default=None, metavar="single|double",
                        help="print width of the figures: single (one column, 90 mm) or double (two columns, "
                             "180 mm); default: the campaign's figure_width, else double")


def _formats(text):
    from zoneprofile._validation import InputError

    items = [f.strip().lower().lstrip(".") for f in text.split(",") if f.strip()]
    for f in items:
        if f not in ("png", "svg", "pdf"):
            raise InputError(f"--figures: unknown format '{f}'; choose from png, svg, pdf")
    return tuple(items) or ("png",)


def report_summary(summary, *, stream=None) -> None:
    """Print the run summary (and the failed crystals) on stderr."""
    stream = stream or sys.stderr
    stream.write(summary.line() + "\n")
    for note in summary.notes:
        stream.write(f"  note: {note}\n")
    for label, error in summary.failed:
        stream.write(f"  failed: {label}: {error}\n")


def run(args):
    from zoneprofile._validation import InputError
    from zoneprofile.campaign import load_campaign, run_campaign

    if args.workers < 1:
        raise InputError(f"--workers must be at least 1, got {args.workers}")
    formats = _formats(args.figures)
    from zoneprofile._paths import shown
    from zoneprofile.campaign._executors import Progress

    line = Progress(0, enabled=not args.quiet)
    line.phase(f"reading the campaign file {shown(args.campaign)}")  # a line at once, however large the campaign
    try:
        campaign = load_campaign(args.campaign, allow_outside=args.allow_outside)
    except BaseException:
        line.close()
        raise
    if args.figure_width is not None:
        campaign.figure_width = args.figure_width
    summary = run_campaign(campaign, args.out, workers=args.workers, scheduler=args.scheduler, force=args.force,
                           progress=not args.quiet, cache=not args.no_cache, formats=formats)
    if not args.quiet:
        report_summary(summary)
    if summary.all_failed:  # a report of failures only is not a success, even with --quiet
        sys.stderr.write(f"zoneprofile run: every crystal failed ({len(summary.failed)} of {summary.n_crystals}); "
                         f"nothing was dated; the reasons are in {summary.out_dir / 'report.html'}\n")
        return 2
    return 0
