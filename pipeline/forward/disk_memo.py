"""Small one-off results kept in the cache folder between processes, under keys that name their inputs.

A fresh process (``radwalk fit``, each worker of a run) used to redo a few
one-off computations whose inputs almost never change: parsing the solver's
source files to find the modules a track grid's key must hash, and probing the
opacity law against its contract.  Their results are small; they are kept in
one JSON file per kind in :func:`radwalk.forward.grid.cache_dir`, under a key
that contains everything the result depends on (the SHA-256 of the source
files, the law's identity...), so an edited source gives a new key and the
old entry is simply never read again.  Nothing here decides whether a result
is still valid: the caller's key does.

A file that cannot be read counts as empty and one that cannot be written only
costs the computation again next time, as for the grids.
"""

from __future__ import annotations

import json
import os
import tempfile

from radwalk.forward.grid import cache_dir

FORMAT = 1
MAX_ENTRIES = 4096  # a kind's file is emptied beyond this (old keys of edited sources pile up otherwise)


def _path(kind: str):
    return cache_dir() / f"memo-{kind}-v{FORMAT}.json"


def load(kind: str) -> dict:
    """Every kept entry of ``kind`` (key -> JSON value); empty if there is no readable file."""
    try:
        with open(_path(kind), encoding="utf-8") as f:
            data = json.load(f)
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def save(kind: str, new: dict) -> None:
    """Adds ``new`` (key -> JSON value) to the kept entries of ``kind``, atomically; errors are ignored."""
    if not new:
        return
    data = load(kind)
    if len(data) + len(new) > MAX_ENTRIES:
        data = {}
    data.update(new)
    path = _path(kind)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump(data, f, sort_keys=True)
            os.replace(tmp, path)  # concurrent writers: the last one wins, each file is whole
        except BaseException:
            os.unlink(tmp)
            raise
    except OSError:
        pass
