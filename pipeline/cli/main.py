"""The `radwalk` command line: the parser and the one place errors become exit codes.

Exit statuses: 0 when every star was fitted (or the command did its work),
1 when some stars failed (or a plugin check failed), 2 on bad input.  Every
deliberate error (a :class:`radwalk.errors.RadwalkError`) becomes one line on
stderr and exit status 2; warnings about validity ranges are printed
as ``warning:`` lines and go on.  Each subcommand lives in its own module and
imports its heavy dependencies only when it runs, so ``radwalk --help`` stays
quick.
"""

from __future__ import annotations

import argparse
import sys
import warnings

from radwalk import __version__
from radwalk.cli import check, demo, fit, grid, model, plugins, report, run
from radwalk.cli.args import EXIT_CODES_TEXT, common_parser
from radwalk.errors import RadwalkError

SUBCOMMANDS = (
    model.add_model_parser, plugins.add_plugins_parser, fit.add_fit_parser, check.add_check_parser,
    run.add_run_parser, report.add_report_parser, demo.add_demo_parser, grid.add_grid_parser,
)


def build_parser() -> argparse.ArgumentParser:
    common = common_parser()
    p = argparse.ArgumentParser(prog="radwalk", description="Stellar interiors and photon transport timescales "
                                "inferred from observed radius, luminosity and effective temperature.")
    p.add_argument("--version", action="version", version=f"radwalk {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    for add in SUBCOMMANDS:
        add(sub, common)
    for parser in (p, *_all_subparsers(sub)):  # every --help ends with the exit statuses
        parser.epilog = EXIT_CODES_TEXT
    return p


def _all_subparsers(action) -> list:
    """The parsers below a subparsers action, nested ones (`grid build`) included."""
    found = []
    for parser in dict.fromkeys(action.choices.values()):
        found.append(parser)
        for a in parser._actions:  # argparse keeps the subparsers action only there
            if isinstance(a, argparse._SubParsersAction):
                found.extend(_all_subparsers(a))
    return found


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"warning: {message}", file=sys.stderr)


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    warnings.showwarning = _show_warning
    try:
        return args.func(args)
    except RadwalkError as exc:
        print(f"radwalk: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:
        if type(exc).__name__ == "Terminated":  # SIGTERM during a run (radwalk.run.orchestrate)
            print("radwalk: terminated; run the same command again to resume", file=sys.stderr)
            return 128 + 15
        print("radwalk: interrupted", file=sys.stderr)
        return 130
    except (IsADirectoryError, NotADirectoryError, PermissionError, FileNotFoundError) as exc:
        # a path the user gave that cannot be used: one line, like every other input error
        where = f": {exc.filename}" if exc.filename else ""
        print(f"radwalk: error: {exc.strerror or exc}{where}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into `head` and the like
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":
    sys.exit(main())
