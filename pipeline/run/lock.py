"""The output folder's lock: one catalog run at a time in a folder.

An advisory ``flock`` on the folder itself (no lock file is left behind):
the kernel drops it when the holding process ends, however it ends, so a
killed run never leaves the folder locked.  The holder names itself in
state.json (``run_by``: pid, host, start), which a refused second run quotes.
(``flock`` on a network file system may lock only among the processes of one
machine: two machines sharing a folder should not run into it at once.)
"""

from __future__ import annotations

import json
import os
from contextlib import contextmanager
from pathlib import Path

from radwalk.errors import ConfigError
from radwalk.results.layout import STATE_FILE


@contextmanager
def folder_lock(out_dir):
    """Holds the folder's lock for the ``with`` block.

    Raises
    ------
    ConfigError
        When another process holds it (the message names its pid, host and start, from state.json).
    """
    import fcntl

    out = Path(out_dir)
    fd = os.open(out, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise ConfigError(f"output folder {out} is in use by another radwalk run ({_holder(out)}); wait for "
                              "it to finish, or choose another --out") from None
        yield
    finally:
        os.close(fd)  # releases the lock


def _holder(out: Path) -> str:
    try:
        info = json.loads((out / STATE_FILE).read_text())["run_by"]
        return f"pid {int(info['pid'])} on {info['host']}, started {info['started']}"
    except (OSError, ValueError, KeyError, TypeError):
        return "not yet named in state.json"
