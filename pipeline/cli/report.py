"""`radwalk report DIR`: rebuild the HTML report of a run folder."""

from __future__ import annotations


def add_report_parser(sub, common):
    """Adds `radwalk report DIR` to the CLI's subparsers."""
    r = sub.add_parser("report", parents=[common], help="write the HTML report of a run folder",
                       description="Writes DIR/report/index.html and a page per star from the files of a "
                                   "finished or partial run; the report opens from the file system.")
    r.add_argument("dir", metavar="DIR", help="output folder of a radwalk run")
    r.set_defaults(func=cmd_report)


def cmd_report(args) -> int:
    """Writes the report and prints the path of its index.html."""
    from radwalk.report.pages import write_report

    print(write_report(args.dir))
    return 0
