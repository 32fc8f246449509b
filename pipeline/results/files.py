"""Atomic file writing (every output goes to a temporary file first, then os.replace) and strict JSON.

Every JSON radwalk writes or prints (summary.json, state.json, ``--json``) is
strict: no NaN or Infinity, which many JSON readers refuse; a missing or
non-finite number is ``null``.
"""

from __future__ import annotations

import errno
import json
import math
import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

import numpy as np

_UMASK = os.umask(0)
os.umask(_UMASK)


# In the name of every temporary file radwalk writes, so that what a killed process left can be told apart
# from anything else and removed (remove_leftovers).
TMP_MARK = ".radwalk-tmp-"
_SCRATCH_PREFIXES = (".radwalk-space-", ".radwalk-probe-", ".radwalk-write-test")


@contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yields a temporary path beside ``path``; on success it replaces ``path`` atomically."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}{TMP_MARK}", suffix=suffix or path.suffix, dir=path.parent)
    os.close(fd)
    os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs should read like any other file
    try:
        yield Path(tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def ensure_space(folder, nbytes: int):
    """Raises OSError(ENOSPC) unless ``nbytes`` can be written in ``folder`` now.

    Reserves the space in a scratch file (``posix_fallocate``, which sees quotas
    too) and frees it again.  Called before handing writes to a library that does
    not survive a failed write: HDF5 crashes the process (segmentation fault) when
    it closes a file whose write hit a full disk, where a plain OSError is wanted.
    """
    folder = Path(folder)
    fd, tmp = tempfile.mkstemp(prefix=".radwalk-space-", dir=folder)
    try:
        try:
            os.posix_fallocate(fd, 0, max(1, int(nbytes)))
        except OSError as exc:
            if exc.errno not in (errno.EOPNOTSUPP, errno.EINVAL, errno.ENOSYS):
                raise OSError(exc.errno, os.strerror(exc.errno), str(folder)) from None
            if shutil.disk_usage(folder).free < nbytes:  # a file system without fallocate: free space only
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(folder)) from None
        except AttributeError:  # no posix_fallocate on this platform
            if shutil.disk_usage(folder).free < nbytes:
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(folder)) from None
    finally:
        os.close(fd)
        os.unlink(tmp)


def remove_leftovers(folder) -> int:
    """Removes the temporary files a killed radwalk process left in ``folder`` (not its subfolders).

    Only files radwalk names so (:data:`TMP_MARK`, its scratch files) are touched.  Call it only
    where no other process is writing: in a star's folder from the star's own task, or in a run
    folder under the run's lock.  Returns how many were removed.
    """
    removed = 0
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return 0
    for entry in entries:
        name = entry.name
        if name.startswith(".") and (TMP_MARK in name or name.startswith(_SCRATCH_PREFIXES)) and entry.is_file():
            try:
                os.unlink(entry.path)
                removed += 1
            except OSError:
                pass
    return removed


def write_text(path, text: str):
    with atomic_path(path) as tmp:
        tmp.write_text(text)


def strict(obj):
    """A copy of ``obj`` fit for strict JSON: non-finite floats become None, numpy values plain Python.

    Dicts, lists and tuples are walked (tuples become lists); numpy scalars and
    arrays (at any depth) become floats, ints, bools and lists.
    """
    if isinstance(obj, dict):
        return {key: strict(v) for key, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [strict(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return strict(obj.tolist())
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def dumps(obj, indent: int | None = 2) -> str:
    """Strict JSON text of ``obj`` (see :func:`strict`); ValueError if a non-finite number slipped through."""
    return json.dumps(strict(obj), indent=indent, allow_nan=False)


def write_json(path, obj):
    """Writes ``obj`` as strict JSON, atomically."""
    write_text(path, dumps(obj) + "\n")


def write_table(table, path, format: str | None = None):
    """Writes an astropy Table atomically; the format follows the file name unless given.

    FITS goes through :func:`fits_table_hdu`, so each column's description becomes its ``TCOMMn`` and the
    meta (``EXTNAME`` among it) header keywords.
    """
    path = Path(path)
    fmt = format or {".ecsv": "ascii.ecsv", ".fits": "fits", ".csv": "ascii.csv"}.get(path.suffix, "ascii.ecsv")
    with atomic_path(path) as tmp:
        if fmt == "fits":
            from astropy.io import fits

            fits.HDUList([fits.PrimaryHDU(), fits_table_hdu(table)]).writeto(tmp, overwrite=True)
        else:
            table.write(tmp, format=fmt, overwrite=True)


def fits_table_hdu(table):
    """A binary-table HDU of ``table``: TCOMMn from each column's description, header keywords from the meta.

    A meta value may be ``(value, comment)``; keys are FITS keywords (at most 8 characters).  astropy writes
    a description only into its own serialized-column comments, which FITS readers other than astropy do not
    show; ``TCOMMn`` is the FITS convention for a column's description.
    """
    from astropy.io import fits
    from astropy.table import Table

    plain = Table(table, copy=False)
    plain.meta = {}
    hdu = fits.table_to_hdu(plain)
    for key, value in table.meta.items():
        value, comment = value if isinstance(value, tuple) else (value, "")
        bare = fits.Card(str(key), value).image.rstrip()
        if len(bare) <= 80:  # a comment that would not fit on the card is shortened (a long string continues)
            comment = comment[:max(0, 80 - len(bare) - 3)]
        hdu.header[str(key)] = (value, comment)
    for j, name in enumerate(table.colnames, start=1):
        words = getattr(table[name], "description", None)
        if words:
            hdu.header[f"TCOMM{j}"] = str(words).encode("ascii", "backslashreplace").decode("ascii")
    return hdu
