"""Where a catalog run's progress goes when no bar is drawn: its per-star log lines, on stderr, as plain lines.

A progress bar redraws itself with carriage returns; written into a log file
those frames pile up as one unreadable line.  So bars are drawn only when
stderr is a terminal (:func:`stderr_is_terminal`), and otherwise the runner's
log lines are copied to stderr (:func:`plain_lines`).  The command line's
progress (:mod:`radwalk.cli.progress`) uses the same two.
"""

from __future__ import annotations

import contextlib
import logging
import sys

__all__ = ["plain_lines", "stderr_is_terminal"]


def stderr_is_terminal() -> bool:
    """Whether stderr is an interactive terminal (where a redrawn bar belongs)."""
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):  # replaced or closed stream
        return False


@contextlib.contextmanager
def plain_lines(logger_name: str, prefix: str = "radwalk: "):
    """Copies a logger's records to stderr as plain lines while the block runs.

    The catalog runner logs one line per star into its run.log; where no bar is
    drawn, the same lines on stderr are the progress.
    """
    logger = logging.getLogger(logger_name)
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter(prefix + "%(message)s"))
    # the commands print the run's notices themselves once it ends: not twice
    handler.addFilter(lambda record: not str(record.msg).startswith("notice:"))
    handler.setLevel(logging.INFO)
    logger.addHandler(handler)
    try:
        yield handler
    finally:
        logger.removeHandler(handler)
        handler.flush()
