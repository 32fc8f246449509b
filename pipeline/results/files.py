"""Atomic file writing: every output goes to a temporary file first, then os.replace."""

from __future__ import annotations

import json
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path

_UMASK = os.umask(0)
os.umask(_UMASK)


@contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yields a temporary path beside ``path``; on success it replaces ``path`` atomically."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix or path.suffix, dir=path.parent)
    os.close(fd)
    os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs should read like any other file
    try:
        yield Path(tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_text(path, text: str):
    with atomic_path(path) as tmp:
        tmp.write_text(text)


def write_json(path, obj):
    write_text(path, json.dumps(obj, indent=2, allow_nan=True) + "\n")


def write_table(table, path, format: str | None = None):
    """Writes an astropy Table atomically; the format follows the file name unless given."""
    path = Path(path)
    fmt = format or {".ecsv": "ascii.ecsv", ".fits": "fits", ".csv": "ascii.csv"}.get(path.suffix, "ascii.ecsv")
    with atomic_path(path) as tmp:
        table.write(tmp, format=fmt, overwrite=True)
