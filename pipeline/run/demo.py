"""The demo: an invented catalog, its true parameters and its config (package data, or demo_catalog/ in a clone),
and how often a run recovers the truths."""

from __future__ import annotations

import importlib.resources
import math
from pathlib import Path

from radwalk.errors import CatalogError
from radwalk.results.chain import posterior_interval
from radwalk.results.layout import CHAIN_FILE, STARS_DIR
from radwalk.run.catalog import CatalogEntry
from radwalk.run.state import summary_docs

# The demo: catalog, truths and config.  A wheel carries them as package data in radwalk/data/demo_catalog
# (setup.py maps the top-level demo_catalog/ folder there); a clone or an editable install reads that
# folder itself, beside the package folder.
DEMO_FILES = {"catalog": "demo_stars.ecsv", "truths": "truths.ecsv", "config": "demo.toml"}
SOURCE_DEMO_DIR = Path(__file__).resolve().parents[2] / "demo_catalog"


def demo_dir() -> Path:
    """The folder holding the demo's files: the installed package data, else the clone's demo_catalog/."""
    shipped = importlib.resources.files("radwalk") / "data" / "demo_catalog"
    if isinstance(shipped, Path) and shipped.is_dir():  # pip installs wheels unpacked, so this is a real folder
        return shipped
    return SOURCE_DEMO_DIR


def demo_paths() -> dict:
    """The demo's catalog, truths and config (CatalogError when they are not installed)."""
    folder = demo_dir()
    paths = {key: folder / name for key, name in DEMO_FILES.items()}
    missing = [str(p) for p in paths.values() if not p.is_file()]
    if missing:
        raise CatalogError(f"the demo catalog is not installed here (missing {', '.join(missing)}); reinstall "
                           "radwalk (pip install radwalk, or pip install -e . in a clone)")
    return paths


def demo_recovery(out_dir, truths_path, level: float = 0.95, names=("mass", "Z", "age")) -> dict:
    """How often the demo's true parameters lie inside the central credible intervals.

    Only converged stars (status ok) with truths count.

    Returns
    -------
    dict
        ``converged`` (stars counted), ``inside`` (name -> stars whose truth is inside),
        ``all_inside`` (stars with every truth inside), ``outside`` (name -> ids),
        ``stars`` (id -> {name: (lower, upper, truth)}), ``refused_as_designed`` (id -> the truths' note, for
        failed stars that the truths mark as having no model: no true mass).
    """
    from astropy.table import Table

    out = Path(out_dir)
    truths = Table.read(truths_path)
    by_id = {str(r["id"]): r for r in truths}
    res = {"converged": 0, "inside": dict.fromkeys(names, 0), "all_inside": 0,
           "outside": {n: [] for n in names}, "stars": {}, "refused_as_designed": {}}
    for doc in summary_docs(out, [CatalogEntry(0, i, None, None) for i in by_id]):
        t = by_id[doc["id"]]
        if doc.get("status") == "failed" and not math.isfinite(float(t["mass"])):
            res["refused_as_designed"][doc["id"]] = str(t["note"]) if "note" in t.colnames else ""
        if doc.get("status") != "ok" or not all(math.isfinite(float(t[n])) for n in names):
            continue
        s = doc["sampler"]
        chain = out / STARS_DIR / doc["folder"] / CHAIN_FILE
        per = {}
        for n in names:
            lo, hi = posterior_interval(chain, n, level, burn=s["burn"], thin=s["thin"])
            per[n] = (lo, hi, float(t[n]))
            if lo <= float(t[n]) <= hi:
                res["inside"][n] += 1
            else:
                res["outside"][n].append(doc["id"])
        res["converged"] += 1
        res["stars"][doc["id"]] = per
        res["all_inside"] += all(lo <= tv <= hi for lo, hi, tv in per.values())
    return res
