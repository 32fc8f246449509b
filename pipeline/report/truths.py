"""True parameters of an invented catalog, for the report's recovered-against-true plot.

A catalog made from the model itself (the demo's, or a user's injection test) has its true parameters in a
table ``truths.ecsv`` (columns ``id`` and ``mass`` in M_sun, at least): in the run folder, else beside the
catalog that run.toml names (the demo's truths sit beside its catalog, demo_catalog/).  A catalog of
measured stars has none, and the report then draws no such plot.
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

from radwalk.results.chain import posterior_interval
from radwalk.results.layout import CHAIN_FILE

TRUTHS_FILE = "truths.ecsv"


def find_truths(out_dir: Path, run: dict) -> Path | None:
    """The truths table of a run folder: ``out_dir/truths.ecsv``, else the one beside run.toml's catalog."""
    here = Path(out_dir) / TRUTHS_FILE
    if here.is_file():
        return here
    catalog = ((run.get("provenance") or {}) if isinstance(run.get("provenance"), dict) else {}).get("catalog")
    if catalog:
        beside = Path(str(catalog)).parent / TRUTHS_FILE
        if beside.is_file():
            return beside
    return None


def _float(x) -> float:
    try:
        return float(x)
    except (TypeError, ValueError):
        return math.nan


def read_true_masses(path: Path) -> dict[str, float]:
    """id -> true mass [M_sun] of every row with a finite mass; empty when the table has no id or mass."""
    from astropy.table import Table

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a unit astropy does not know must not stop a report
        table = Table.read(path, format="ascii.ecsv")
    if "id" not in table.colnames or "mass" not in table.colnames:
        return {}
    col = table["mass"]
    unit = str(getattr(col, "unit", "") or "")
    if unit not in ("", "solMass", "M_sun", "Msun"):
        return {}  # a mass in another unit would be plotted against M_sun: leave the plot out
    out = {}
    for sid, m in zip(table["id"], col):
        m = _float(m)
        if math.isfinite(m):
            out[str(sid)] = m
    return out


def mass_recovery(out_dir: Path, run: dict, entries) -> tuple[list[dict], str]:
    """Recovered against true mass of every fitted star with a truth; ([], "") without a truths table.

    Parameters
    ----------
    out_dir : Path
        The run folder.
    run : dict
        Its parsed run.toml (empty when missing).
    entries : list of radwalk.report.pages.StarEntry
        The run's stars.

    Returns
    -------
    rows : list of dict
        One per star with a truth and a fitted mass: ``id``, ``truth`` [M_sun], ``p16``, ``p50``, ``p84``
        (summary.json) and ``p2_5``, ``p97_5`` [M_sun] (the central 95 % from chain.h5, NaN without a chain),
        ``ok`` (status ok).
    source : str
        The truths table's path, "" when none was found.
    """
    path = find_truths(out_dir, run)
    if path is None:
        return [], ""
    try:
        truths = read_true_masses(path)
    except (OSError, ValueError):  # an unreadable truths table only costs the plot
        return [], ""
    rows = []
    for e in entries:
        s = e.summary or {}
        mass = (s.get("parameters") or {}).get("mass") or {}
        if e.status == "failed" or e.id not in truths or not math.isfinite(_float(mass.get("p50"))):
            continue
        lo95 = hi95 = math.nan
        chain = Path(out_dir) / "stars" / e.folder / CHAIN_FILE
        sampler = s.get("sampler") or {}
        if chain.is_file():
            try:
                lo95, hi95 = posterior_interval(chain, "mass", 0.95, burn=int(sampler.get("burn") or 0),
                                                thin=int(sampler.get("thin") or 1))
            except (OSError, KeyError, ValueError):  # a chain without mass (held fixed) or unreadable
                pass
        rows.append({"id": e.id, "truth": truths[e.id], "p16": _float(mass.get("p16")),
                     "p50": _float(mass.get("p50")), "p84": _float(mass.get("p84")), "p2_5": lo95, "p97_5": hi95,
                     "ok": e.status == "ok"})
    return rows, str(path)
