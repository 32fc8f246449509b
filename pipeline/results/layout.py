"""The run-folder layout: the names of a run's files and each star's folder.

A catalog run's output folder DIR holds::

    summary.ecsv, summary.fits   one row a star, in catalog order (radwalk.results.table)
    stars/<safe-id>/             chain.h5, the PNGs and summary.json (written last: the star is done)
    run.toml                     the resolved config plus a [provenance] table
    radwalk.log                  one line a star: id, status, seconds, reason
    state.json                   fingerprints of the catalog, config and plugins, for resume checks
    report/                      the HTML report (radwalk.report.pages), unless turned off

A single fit (``radwalk fit``) writes one star folder of the same kind.
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

from radwalk.errors import CatalogError

SUMMARY_ECSV = "summary.ecsv"
SUMMARY_FITS = "summary.fits"
STARS_DIR = "stars"
RUN_TOML = "run.toml"
LOG_FILE = "radwalk.log"
STATE_FILE = "state.json"
REPORT_DIR = "report"
RUN_FILES = (SUMMARY_ECSV, SUMMARY_FITS, RUN_TOML, LOG_FILE, STATE_FILE, STARS_DIR, REPORT_DIR)

STAR_SUMMARY = "summary.json"  # in a star's folder, written last
CHAIN_FILE = "chain.h5"


def chain_file_name(opacity: str, primary: bool, partial: bool = False) -> str:
    """The chain file of one opacity law in a star's folder (``.partial`` while the fit runs).

    The primary law's chain is ``chain.h5``; each compared law has ``chain-<law>.h5``.
    """
    stem = "chain" if primary else f"chain-{opacity}"
    return f"{stem}.partial.h5" if partial else f"{stem}.h5"


def safe_folder_name(star_id: str) -> str:
    """A file-system-safe, unique folder name for a star id (never a path outside its parent)."""
    base = re.sub(r"[^A-Za-z0-9._-]+", "_", star_id).strip("._-")[:60] or "star"
    if base == star_id:
        return base
    return f"{base}-{hashlib.sha256(star_id.encode()).hexdigest()[:8]}"


def star_folder(out_dir: Path, star_id: str) -> Path:
    """stars/<safe-id> inside ``out_dir``; never a path outside it."""
    stars = (Path(out_dir) / STARS_DIR).resolve()
    folder = (stars / safe_folder_name(star_id)).resolve()
    if folder.parent != stars:  # cannot happen with safe_folder_name; checked because ids are user text
        raise CatalogError(f"star id {star_id!r} maps outside the output folder")
    return folder
