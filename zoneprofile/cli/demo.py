"""`zoneprofile demo`: write the invented demo campaign and run it."""

from __future__ import annotations

DESCRIPTION = """\
Write an invented demo campaign and run the whole job on it, so you can see
what zoneprofile does in under a minute and copy a working campaign file.

The demo volcano, its samples and crystals are invented; the data come from a
seeded forward model (zoned plagioclase, Mg and Sr diffused after two recharge
events at known times, analysed by microprobe, laser and one element map).

DIR/campaign/   the campaign file (emberfell.toml, with comments), its input
                tables and map, and truth.json (what the generator planted)
DIR/            report.html, results.json, tables/, figures/ from running it

Re-run the campaign yourself with:
  zoneprofile run DIR/campaign/emberfell.toml --out OTHER_DIR

Diffusion timescales inform, and do not replace, hazard assessment, which
belongs to the responsible observatory and local authorities.
"""


def configure(parser):
    parser.add_argument("--out", default="zoneprofile-demo", metavar="DIR",
                        help="output folder (default: zoneprofile-demo; must not exist unless --force)")
    parser.add_argument("--force", action="store_true", help="replace an existing output folder")
    parser.add_argument("--workers", type=int, default=None, metavar="N",
                        help="crystals computed in parallel by N local processes (default: the number of "
                             "processors, at most 4)")
    parser.add_argument("--seed", type=int, default=None, metavar="N",
                        help="seed of the forward model (default: the fixed demo seed)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar and no summary on stderr")


def run(args):
    import sys
    import time
    from pathlib import Path

    from zoneprofile._outdir import OutputFolder
    from zoneprofile._validation import InputError
    from zoneprofile.campaign import execute_campaign, load_campaign, write_campaign_outputs
    from zoneprofile.cli.run import report_summary
    from zoneprofile.demo import CAMPAIGN_NAME, DEMO_SEED, make_demo

    import os

    workers = min(4, os.cpu_count() or 1) if args.workers is None else args.workers
    if workers < 1:
        raise InputError(f"--workers must be at least 1, got {workers}")
    seed = DEMO_SEED if args.seed is None else args.seed
    if seed < 0:
        raise InputError(f"--seed must be 0 or more, got {seed}")
    out = Path(args.out)
    t0 = time.monotonic()
    target = OutputFolder(out, force=args.force, command="demo")  # checked and locked before computing
    with target as tmp:
        made = make_demo(tmp / "campaign", seed=seed)
        campaign = load_campaign(made["campaign"])
        summary = execute_campaign(campaign, workers=workers, progress=not args.quiet,
                                   campaign_path_shown=f"campaign/{CAMPAIGN_NAME}")
        write_campaign_outputs(summary, tmp)
    summary.out_dir = out
    summary.notes[:0] = target.notes
    summary.seconds = time.monotonic() - t0
    if not args.quiet:
        report_summary(summary)
        sys.stderr.write(f"the demo's campaign file is {out / 'campaign' / CAMPAIGN_NAME}; "
                         f"the generator's truth is in {out / 'campaign' / 'truth.json'}\n")
    return 0
