"""The summary table of a catalog run: one row a star and opacity law, built from the stars' summary.json documents.

A run with one opacity law has one row a star.  A run that compares several
laws (``--opacity a,b``) has one row for every star and law, the star's rows
together in the run's order of the laws; ``primary`` is true on the row of the
run's first law, so ``table[table["primary"]]`` is the one-row-a-star table.
Each row's ``status``, ``reason``, fit and sampler columns are that law's: a
law that could not fit a star has a ``failed`` row whose ``reason`` names the
law, beside the other laws' rows of the same star.

Columns, in order: ``id``, ``folder`` (the star's folder name under
``stars/``), ``status``, ``reason``, ``warnings``
(joined with " | "), ``opacity``, ``unconstrained``, ``primary``; the observed values and
their errors (``radius_obs``, ``radius_obs_err``, ... in R_sun, L_sun, K;
``feh_obs``, ``feh_obs_err`` in dex); for every sampled parameter
``<name>_p16``, ``<name>_p50``, ``<name>_p84`` and ``<name>_map``; for every
derived quantity ``<name>_p16``, ``<name>_p50``, ``<name>_p84``; then
``converged``, ``acceptance``, ``tau_max``, ``ess_min``, ``steps``,
``ppc_pvalue``, ``seconds``.  Columns carry astropy units and a description
in words (the ECSV header's ``description``, the FITS header's ``TCOMMn``).  A
failed star has NaN in every numeric column (and ``converged`` false); so has
a number that summary.json holds as null.

The table's meta records the run's provenance: ``seed``, ``stages`` (stage ->
component of the fits, as the stars' documents say; the opacity is the first
law), ``laws`` (every opacity law, in the run's order), ``stars`` (distinct
stars, not rows) and ``versions`` (radwalk's, Python's and the libraries');
:func:`fits_safe` puts the same into FITS header keywords beside
``EXTNAME = 'SUMMARY'`` (``NLAWS`` and ``LAW1``, ``LAW2``, ... for the laws).

:func:`build_summary_table` consumes its documents one at a time and keeps
only the flat rows, so a large catalog's table does not hold every star's
full summary in memory.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import astropy.units as u
import numpy as np
from astropy.table import Column, Table

from radwalk import __version__
from radwalk.forward.quantities import description, quantity
from radwalk.host.stages import STAGES
from radwalk.results.document import OBSERVED_UNITS
from radwalk.results.provenance import package_versions

OBSERVED = tuple(OBSERVED_UNITS.items())
PERCENTILE_KEYS = ("p16", "p50", "p84")
SAMPLER_COLUMNS = ("converged", "acceptance", "tau_max", "ess_min", "steps", "ppc_pvalue", "seconds")
TEXT_COLUMNS = ("id", "folder", "status", "reason", "warnings", "opacity", "unconstrained")
WARNING_SEPARATOR = " | "
# a fit's entries of a summary document (also those of each law in its ``comparison`` section)
FIT_KEYS = ("reason", "warnings", "parameters", "derived", "sampler", "ppc_pvalue", "unconstrained")

_NAN = float("nan")
TEXT_WORDS = {
    "id": "star identifier, as in the catalog",
    "folder": "the star's folder under stars/ in the run folder",
    "status": "ok (converged), not-converged (results from a chain cut at max_steps) or failed",
    "reason": "why the star failed or did not converge (empty if ok)",
    "warnings": f"the fit's warnings, joined with '{WARNING_SEPARATOR.strip()}'",
    "opacity": "opacity law of the fit the other columns give",
    "primary": "true on the row of the run's first opacity law (one such row a star); false on a compared law's",
    "unconstrained": "parameters whose posterior is at least half as wide as the prior (the data say little)",
    "converged": "whether the chain met the convergence test (length over tau and a settled tau)",
}
EXTNAME = "SUMMARY"
STAGE_KEYWORDS = {stage: stage.upper()[:8] for stage in STAGES}  # FITS keywords: at most 8 characters


def _unit(text: str | None):
    """An astropy unit from the summary's unit string; None for dimensionless or unparseable."""
    if not text:
        return None
    try:
        return u.Unit(text)
    except ValueError:
        return None


def _num(v) -> float:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return _NAN
    return f


def _law_views(doc: dict, laws: tuple) -> list[tuple[dict, bool]]:
    """(the document as seen by one opacity law, is it the run's first law) for each row of the document.

    A document with a ``comparison`` section gives one view per law in it: the
    law's own fit, status and reason over the star's observed values (the law
    whose fit is the document's main one keeps the document's warnings, which
    name any law that failed).  A failed document without one (a star every
    law failed, a catalog row that could not be read) gives one view per law of
    ``laws``, each with the star's reason; any other document one view.
    """
    comp = doc.get("comparison")
    if isinstance(comp, dict) and comp:
        first = laws[0] if laws else next(iter(comp))
        views = []
        for op, entry in comp.items():
            entry = entry if isinstance(entry, dict) else {}
            # another law's row takes nothing of the main fit's (a failed law has no numbers at all)
            base = doc if op == doc.get("opacity") else {k: v for k, v in doc.items() if k not in FIT_KEYS}
            view = {**base, **entry, "opacity": op}
            view["status"] = entry.get("status") or doc.get("status")  # written before laws had their own
            if op == doc.get("opacity"):
                view["warnings"] = doc.get("warnings")
            views.append((view, op == first))
        return views
    if doc.get("status") == "failed" and len(laws) > 1:
        return [({**doc, "opacity": op}, j == 0) for j, op in enumerate(laws)]
    op = doc.get("opacity") or (laws[0] if laws and doc.get("status") == "failed" else "")
    return [({**doc, "opacity": op}, not laws or op in ("", laws[0]))]


def _flat_row(doc: dict) -> tuple[dict, dict, dict]:
    """(text and scalar values, parameter name -> unit, derived name -> unit) of one document."""
    row = {
        "id": str(doc.get("id", "")),
        "folder": str(doc.get("folder", "")),
        "status": str(doc.get("status", "failed")),
        "reason": " ".join(str(doc.get("reason") or "").split()),
        "warnings": WARNING_SEPARATOR.join(" ".join(str(w).split()) for w in doc.get("warnings", []) or []),
        "opacity": str(doc.get("opacity") or ""),
        "unconstrained": ", ".join(doc.get("unconstrained", []) or []),
    }
    obs = doc.get("observed") or {}
    for key, _ in OBSERVED:
        o = obs.get(key) or {}
        row[f"{key}_obs"] = _num(o.get("value"))
        row[f"{key}_obs_err"] = _num(o.get("error"))
    feh = doc.get("feh")
    row["feh_obs"], row["feh_obs_err"] = (_num(feh[0]), _num(feh[1])) if feh else (_NAN, _NAN)
    punits, dunits = {}, {}
    for name, p in (doc.get("parameters") or {}).items():
        punits[name] = p.get("unit", "")
        for key in (*PERCENTILE_KEYS, "map"):
            row[f"{name}_{key}"] = _num(p.get(key))
    for name, d in (doc.get("derived") or {}).items():
        dunits[name] = d.get("unit", "")
        for key in PERCENTILE_KEYS:
            row[f"{name}_{key}"] = _num(d.get(key))
    sampler = doc.get("sampler") or {}
    params = doc.get("parameters") or {}
    ess = [e for e in (_num(p.get("ess")) for p in params.values()) if math.isfinite(e)]
    row["converged"] = bool(sampler.get("converged", False))
    row["acceptance"] = _num(sampler.get("acceptance"))
    row["tau_max"] = _num(sampler.get("tau_max"))
    row["ess_min"] = min(ess) if ess else _NAN
    row["steps"] = _num(sampler.get("steps"))
    row["ppc_pvalue"] = _num(doc.get("ppc_pvalue"))
    row["seconds"] = _num(doc.get("seconds"))
    return row, punits, dunits


def _text_column(name: str, values: list[str]) -> Column:
    width = max([1] + [len(v) for v in values])
    return Column(np.array(values, dtype=f"U{width}"), name=name)


def build_summary_table(docs: Iterable[dict], laws: tuple = ()) -> Table:
    """One row a star and opacity law from summary documents (summary.json contents plus ``folder``).

    Parameters
    ----------
    docs : iterable of dict
        Summary documents in catalog order; consumed one at a time.
    laws : tuple of str
        The run's opacity laws in order (``RunConfig.opacity_names()``): the
        rows of a star that failed before any law was fitted.  Without it, a
        document's ``comparison`` section gives its laws.

    Returns
    -------
    astropy.table.Table
        See the module docstring for the rows and columns; units on every dimensional column.
    """
    laws = tuple(laws)
    rows: list[dict] = []
    punits: dict[str, str] = {}
    dunits: dict[str, str] = {}
    seed, stages, seen, n_stars = None, {}, list(laws), 0
    for doc in docs:
        n_stars += 1
        for view, primary in _law_views(doc, laws):
            row, pu, du = _flat_row(view)
            row["primary"] = primary
            rows.append(row)
            if row["opacity"] and row["opacity"] not in seen:
                seen.append(row["opacity"])
            for n, un in pu.items():
                punits.setdefault(n, un)
            for n, un in du.items():
                dunits.setdefault(n, un)
        if seed is None and doc.get("seed") is not None:
            seed = doc["seed"]
        if not stages and doc.get("stages"):
            stages = {str(k): str(v) for k, v in doc["stages"].items()}
    if stages and seen:
        stages["opacity"] = seen[0]  # a star whose first law failed has the next law's stages
    table = Table()
    for name in TEXT_COLUMNS:
        table.add_column(_text_column(name, [r[name] for r in rows]))
        table[name].description = TEXT_WORDS[name]
    table.add_column(Column(np.array([r["primary"] for r in rows], dtype=bool), name="primary",
                            description=TEXT_WORDS["primary"]))

    def add(name, unit=None, description=None):
        values = np.array([r.get(name, _NAN) for r in rows], dtype=float)
        table.add_column(Column(values, name=name, unit=_unit(unit), description=description))

    for key, unit in OBSERVED:
        add(f"{key}_obs", unit, f"observed {quantity(key).short}")
        add(f"{key}_obs_err", unit, f"uncertainty of the observed {quantity(key).short}")
    add("feh_obs", None, "observed [Fe/H] (dex)")
    add("feh_obs_err", None, "uncertainty of the observed [Fe/H] (dex)")
    for name, unit in punits.items():
        for key in PERCENTILE_KEYS:
            add(f"{name}_{key}", unit, f"{description(name)}: {key[1:]}th percentile of the posterior")
        add(f"{name}_map", unit, f"{description(name)} at the posterior maximum")
    for name, unit in dunits.items():
        if f"{name}_p16" in table.colnames:
            continue  # a parameter of the same name already has its columns
        for key in PERCENTILE_KEYS:
            add(f"{name}_{key}", unit, f"{description(name)}: {key[1:]}th percentile over the posterior samples")
    table.add_column(Column(np.array([r["converged"] for r in rows], dtype=bool), name="converged",
                            description=TEXT_WORDS["converged"]))
    add("acceptance", None, "mean acceptance fraction of the walkers")
    add("tau_max", None, "largest integrated autocorrelation time (steps)")
    add("ess_min", None, "smallest effective sample size over the parameters")
    add("steps", None, "chain length (steps)")
    add("ppc_pvalue", None, "posterior-predictive p-value of chi^2")
    add("seconds", "s", "wall time of the star's fit")
    table.meta["radwalk_version"] = __version__
    table.meta["stars"] = n_stars
    table.meta["seed"] = seed
    table.meta["stages"] = stages
    table.meta["laws"] = seen
    table.meta["versions"] = package_versions()
    return table


def fits_safe(table: Table) -> Table:
    """A copy FITS can hold: text is ASCII only (other characters written as escapes)."""
    out = table.copy(copy_data=True)
    for name in out.colnames:
        col = out[name]
        if col.dtype.kind == "U":
            vals = [str(v).encode("ascii", "backslashreplace").decode("ascii") for v in col]
            out.replace_column(name, _text_column(name, vals))
            out[name].description = col.info.description
    meta = table.meta
    out.meta = {"EXTNAME": EXTNAME, "RADWALK": (str(meta.get("radwalk_version", __version__)), "radwalk version"),
                "NSTARS": (int(meta.get("stars", len(out))), "stars (one row a star and opacity law)")}
    if meta.get("seed") is not None:
        out.meta["SEED"] = (int(meta["seed"]), "the run's seed")
    for stage, value in (meta.get("stages") or {}).items():
        if stage in STAGE_KEYWORDS:
            out.meta[STAGE_KEYWORDS[stage]] = (_ascii(value), f"{stage} stage of the fits")
    laws = list(meta.get("laws") or [])
    out.meta["NLAWS"] = (len(laws), "opacity laws fitted, one row each a star")
    for j, law in enumerate(laws[:99], start=1):
        out.meta[f"LAW{j}"] = (_ascii(law), "the run's first (primary) opacity law" if j == 1 else
                               "a compared opacity law")
    for name, version in (meta.get("versions") or {}).items():
        if name != "radwalk":
            out.meta[f"V_{name.upper()[:6]}"] = (_ascii(version), f"{name} version")
    if meta.get("catalog_sha256"):
        out.meta["CATSHA"] = (str(meta["catalog_sha256"])[:64], "sha256 of the catalog file")
    return out


def _ascii(text) -> str:
    return str(text).encode("ascii", "backslashreplace").decode("ascii")
