"""`radwalk run CATALOG --out DIR`: fit every star of a catalog into an output folder."""

from __future__ import annotations

import sys
from typing import TYPE_CHECKING

from radwalk.cli.args import POSITIVE_INT, add_config_options, config_from_args

if TYPE_CHECKING:
    from radwalk.run.orchestrate import RunOutcome


def add_run_parser(sub, common):
    """``radwalk run CATALOG --out DIR ...``"""
    p = sub.add_parser("run", parents=[common], help="fit every star of a catalog into an output folder",
                       description="Fits every star of CATALOG and writes summary tables, per-star folders and "
                       "a report into DIR; each star's plots are drawn once every star is fitted and stored.  "
                       "Running the same command again resumes an interrupted run.")
    p.add_argument("catalog", metavar="CATALOG", help="ECSV, FITS, VOTable or CSV table of stars")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder (created if needed)")
    p.add_argument("--executor", choices=("local", "dask"), default=None,
                   help="local process pool (default) or a Dask cluster")
    p.add_argument("--workers", type=POSITIVE_INT, metavar="N", help="worker processes (default: all cores)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler address, e.g. tcp://host:8786")
    add_config_options(p)
    p.add_argument("--force", action="store_true", help="recompute every star; accept a changed catalog or config")
    p.add_argument("--no-plots", action="store_true",
                   help="fit and store the stars only, without their PNG plots (a later run without it draws them)")
    p.add_argument("--no-report", action="store_true", help="skip the HTML report")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_run)
    return p


def print_outcome(outcome: RunOutcome):
    print(f"radwalk: {outcome.line()}")
    print(f"summary: {outcome.summary_ecsv} (and {outcome.summary_fits.name})")
    if outcome.report:
        print(f"report: {outcome.report}")
    elif outcome.report_message:
        print(f"radwalk: {outcome.report_message}", file=sys.stderr)


def cmd_run(args) -> int:
    config = config_from_args(args, validate=False)  # run_catalog checks the stages itself
    executor = args.executor or ("dask" if args.scheduler else "local")
    outcome = run_with_progress(args.catalog, args.out, config, executor=executor, workers=args.workers,
                                scheduler=args.scheduler, force=args.force, report=not args.no_report,
                                quiet=args.quiet, plots=not args.no_plots)
    for note in outcome.notices:
        print(f"notice: {note}", file=sys.stderr)
    print_outcome(outcome)
    return exit_status(outcome)


def exit_status(outcome: RunOutcome) -> int:
    """0 when every star was fitted (converged or not), 1 when some failed."""
    return 1 if outcome.failed else 0


def run_with_progress(catalog, out, config, quiet: bool = False, **options) -> RunOutcome:
    """:func:`radwalk.run.orchestrate.run_catalog`, which fits its progress to where stderr goes.

    On a terminal the runner's bars; elsewhere (a log file, a pipe) the runner's
    per-star log lines on stderr instead, with no carriage-return frames.
    """
    from radwalk.run.orchestrate import run_catalog

    return run_catalog(catalog, out, config, quiet=quiet, **options)
