"""The per-star summary document (summary.json): how it is put together and read back, and its thresholds.

A document holds ``id``, ``status`` (one of :data:`STATUSES`), ``reason``,
``observed`` (name -> {"value", "error"} in :data:`OBSERVED_UNITS`), ``feh``
([value, error] in dex, or null), ``seed``, ``radwalk_version`` and
``seconds``, ``luminosity_derived`` (true when the catalog computed L from its
R and T_eff, so that the fit left L out: see
:class:`radwalk.inference.star.Star`); a fitted star adds the fit's summary (``opacity``, ``stages``,
``parameters``, ``fixed``, ``derived``, ``sampler``, ``ppc_pvalue``,
``unconstrained``, ``warnings``, ``plots`` and, when several opacity laws
were fitted, ``comparison``: law -> that law's fit with its own ``status``
and ``reason``, or only those two and empty ``warnings`` for a law that
could not fit the star; the main entries are then the first law's that
fitted, named by ``opacity``).  Every percentile entry holds ``p16``, ``p50``
and ``p84`` (:data:`PERCENTILES`).  The file is strict JSON: a number that is
missing or not finite is ``null``, and readers take null as "no value".
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from radwalk import __version__

STATUSES = ("ok", "not-converged", "failed")
PERCENTILES = (16.0, 50.0, 84.0)  # the p16, p50, p84 of every parameter and derived quantity
PPC_POOR = 0.01  # posterior-predictive p-value below which the fit is flagged as poor
NO_REACH_SIGMA = 5.0  # an observable this many sigma from the best model cannot be reached ...
# ... when the miss is also beyond this many times the likelihood's model error of that observable (its
# floor_<name>; at least NO_REACH_FRACTION): a miss the model is known to make is not a star it cannot reach
NO_REACH_MODEL_ERRORS = 2.0
NO_REACH_FRACTION = 0.1

# Units of the document's "observed" block (the catalogue's output units of these observables).
OBSERVED_UNITS = {"radius": "R_sun", "luminosity": "L_sun", "teff": "K"}


def document(star_id: str, status: str, reason: str, observed: dict, feh, seed: int, seconds: float,
             luminosity_derived: bool = False, **rest) -> dict:
    """A summary document from its parts.

    Parameters
    ----------
    star_id : str
    status : str
        One of :data:`STATUSES`.
    reason : str
        Why the star failed or did not converge ("" when ok).
    observed : dict
        name -> (value, error) in :data:`OBSERVED_UNITS` (NaN: not measured).
    feh : tuple of float or None
        ([Fe/H], error) in dex.
    seed : int
        The run's global seed.
    seconds : float, s
        Wall time of the star's fit.
    luminosity_derived : bool
        The catalog's L was computed from its R and T_eff (and left out of the likelihood).
    **rest
        Further entries, appended in order (the fit's summary, ``catalog_row``, ...).
    """
    return {
        "id": star_id, "status": status, "reason": reason,
        "observed": {key: {"value": v, "error": e} for key, (v, e) in observed.items()},
        "feh": list(feh) if feh else None,
        "seed": seed, "radwalk_version": __version__, "seconds": seconds,
        "luminosity_derived": bool(luminosity_derived),
        **rest,
    }


def star_fingerprint(star, config) -> str:
    """sha256 of everything a star's result depends on: its catalog values, the config, the stages, the plugins.

    Stored in the star's summary.json as ``fingerprint``; a resumed run reuses the
    document only when it matches (:func:`radwalk.run.state.load_done`), so a changed
    config, catalog row, default stage, plugin file or radwalk version is recomputed
    even when the run-level check (state.json) is gone.  Plugin files count by
    content, not path (a Dask worker may load an uploaded copy).
    """
    from radwalk.host.stages import DEFAULTS

    cfg = config.to_dict()
    cfg["run"] = {k: v for k, v in cfg["run"].items() if k != "plugins"}
    plugins = []
    for p in config.plugins:
        try:
            plugins.append(hashlib.sha256(Path(p).read_bytes()).hexdigest())
        except OSError:
            plugins.append(f"unreadable {p}")
    what = {
        "id": star.id, "observed": {k: list(v) for k, v in star.user_values().items()},
        "feh": list(star.feh) if star.feh else None, "luminosity_derived": bool(star.luminosity_derived),
        "config": cfg, "stages": [{**DEFAULTS, **config.stage_names(op)} for op in config.opacity_names()],
        "plugins": sorted(plugins), "radwalk_version": __version__,
    }
    # NaN allowed: hashed, never written (an unmeasured T_eff is NaN)
    return hashlib.sha256(json.dumps(what, sort_keys=True, allow_nan=True, default=float).encode()).hexdigest()


def result_document(star, config, result) -> dict:
    """summary.json of one fitted (or failed) star.

    Parameters
    ----------
    star : radwalk.inference.star.Star
    config : radwalk.host.config.RunConfig
    result : radwalk.inference.fit.StarResult
    """
    return document(star.id, result.status, result.reason, star.user_values(), star.feh, config.seed,
                    result.seconds, luminosity_derived=star.luminosity_derived,
                    fingerprint=star_fingerprint(star, config), **result.summary)


def read_document(path) -> dict | None:
    """A summary.json as a dict; None when it is missing, unreadable or not a JSON object."""
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return doc if isinstance(doc, dict) else None
