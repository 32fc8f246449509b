"""`radwalk demo`: the invented demo catalog end to end."""

from __future__ import annotations

from pathlib import Path

from radwalk.cli.args import POSITIVE_INT
from radwalk.cli.run import print_outcome


def add_demo_parser(sub, common):
    """``radwalk demo [--out ./radwalk-demo] [--workers N]``"""
    p = sub.add_parser("demo", parents=[common], help="run the invented demo catalog end to end",
                       description="Fits the invented demo catalog (demo_catalog/) and writes its report.")
    p.add_argument("--out", default="radwalk-demo", metavar="DIR", help="output folder (default ./radwalk-demo)")
    p.add_argument("--workers", type=POSITIVE_INT, metavar="N", help="worker processes (default: all cores)")
    p.add_argument("--force", action="store_true", help="recompute every star")
    p.add_argument("--no-report", action="store_true", help="skip the HTML report")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_demo)
    return p


def cmd_demo(args) -> int:
    from radwalk.run.demo import demo_paths, demo_recovery
    from radwalk.run.orchestrate import load_run_config, run_catalog

    paths = demo_paths()
    config = load_run_config(paths["config"])
    extra = [str(Path(p).expanduser().resolve()) for p in getattr(args, "plugin", None) or ()]
    if extra:
        config = config.with_changes(plugins=tuple(dict.fromkeys((*config.plugins, *extra))))
    print(f"radwalk demo: {paths['catalog'].name} (an invented field, see {paths['catalog'].parent / 'README.md'})")
    outcome = run_catalog(paths["catalog"], args.out, config, workers=args.workers, force=args.force,
                          report=not args.no_report, quiet=args.quiet)
    print_outcome(outcome)
    rec = demo_recovery(outcome.out_dir, paths["truths"])
    if rec["converged"]:
        shown = ", ".join(f"{n} {c}" for n, c in rec["inside"].items())
        print(f"true values inside the 95 % intervals, of {rec['converged']} converged stars: {shown} "
              f"({paths['truths'].name})")
    if outcome.report:
        print(f"open {outcome.report} in a browser")
    return 0
