"""A stored star's figures, drawn after every star of a catalog run is fitted and stored.

A catalog run (:mod:`radwalk.run.orchestrate`) fits each star and stores its
chain files and summary.json without figures, then draws the figures of the
stored stars.  Drawing reads the star's folder back: the chains come from its
chain files, and the thinned samples, the parameters drawn from their priors
and the derived quantities are made again by the fit's own functions with the
fit's own seeds (:func:`radwalk.inference.fit.fit_one`), so they are the
numbers the fit had; nothing is sampled again.  The profile bands' solved
structures, which a track-grid fit leaves for the figures, are solved here, and
their validity warnings join the star's, as when a fit draws its own figures;
summary.json then gets its ``plots`` entry.  A stopped run, or one run with
``plots=False``, leaves stars without that entry, and the next run draws them.
"""

from __future__ import annotations

import math
import time
import traceback
import warnings
from dataclasses import dataclass
from functools import partial
from pathlib import Path

import numpy as np

from radwalk.errors import EnvironmentProblem, RadwalkError, ValidityWarning, environment_cause
from radwalk.results.document import read_document
from radwalk.results.files import write_json
from radwalk.results.layout import STAR_SUMMARY, chain_file_name

# Every per-star figure a star folder can hold (radwalk.report.figures): removed when the star is fitted again.
FIGURE_KINDS = ("corner_parameters", "corner_timescales", "trace", "profile", "predictive", "opacity_comparison")


@dataclass
class FiguresResult:
    """What drawing one star's figures did (picklable, small)."""

    id: str
    plots: dict  # kind -> file name; empty when none was drawn
    error: str = ""  # why none was drawn
    seconds: float = 0.0


def needs_figures(folder: Path, doc: dict | None) -> bool:
    """Whether a stored star still lacks figures: fitted (not failed), and ``plots`` missing or a file gone."""
    if not doc or doc.get("status") not in ("ok", "not-converged"):
        return False
    plots = doc.get("plots")
    if not isinstance(plots, dict) or not plots:
        return True
    return not all(isinstance(name, str) and (Path(folder) / name).is_file() for name in plots.values())


def remove_figures(folder) -> None:
    """Removes a star's figure files (an earlier fit's, before the star is fitted again)."""
    for kind in FIGURE_KINDS:
        (Path(folder) / f"{kind}.png").unlink(missing_ok=True)


def stored_chain(path, sampler: dict | None = None):
    """A :class:`radwalk.inference.sampler.Chain` read back from a chain file.

    Burn-in, thinning and the MAP point follow from the stored chain and its
    last ``tau`` as :func:`radwalk.inference.sampler.run_chain` sets them; the
    acceptance and the stopping reason are not in the file and come from the
    summary's ``sampler`` section (NaN and "" without it).

    Raises
    ------
    RadwalkError
        When the summary's burn-in or thinning disagree with the file's.
    """
    import h5py

    from radwalk.inference.sampler import Chain

    with h5py.File(path, "r") as f:
        chain = np.asarray(f["chain"][...])
        log_prob = np.asarray(f["log_prob"][...])
        names = [n.decode() if isinstance(n, bytes) else str(n) for n in f.attrs["names"]]
        tau = np.asarray(f.attrs["tau"], dtype=float)
        converged = bool(f.attrs["converged"])
    steps = chain.shape[0]
    burn = min(int(math.ceil(3 * float(np.max(tau)))), steps // 2)
    thin = max(1, int(0.5 * np.min(tau)))
    sampler = sampler or {}
    if sampler and (sampler.get("burn"), sampler.get("thin"), sampler.get("steps")) != (burn, thin, steps):
        raise RadwalkError(f"{path}: its chain gives burn-in {burn}, thinning {thin} and {steps} steps, the "
                           f"summary {sampler.get('burn')}, {sampler.get('thin')} and {sampler.get('steps')}")
    i, j = np.unravel_index(np.argmax(log_prob), log_prob.shape)
    acceptance = sampler.get("acceptance")
    return Chain(names=names, chain=chain, log_prob=log_prob, tau=tau,
                 acceptance=float(acceptance) if isinstance(acceptance, (int, float)) else math.nan,
                 burn=burn, thin=thin, converged=converged, reason=str(sampler.get("reason") or ""),
                 map_theta=chain[i, j].copy(), map_log_prob=float(log_prob[i, j]))


def stored_products(star, config, folder) -> dict:
    """The fit's in-memory products of a stored star, per opacity law, made again from its folder.

    Parameters
    ----------
    star : radwalk.inference.star.Star
    config : radwalk.host.config.RunConfig
        The run's config (the one the star was fitted with).
    folder : str or Path
        The star's folder (chain files and summary.json).

    Returns
    -------
    dict
        opacity law -> :class:`radwalk.results.products.FitProducts` of every law that fitted, in the
        run's order.
    """
    from radwalk.inference.derived import band_structures, derive
    from radwalk.inference.fit import _evenly, stages_for
    from radwalk.inference.posterior import Posterior
    from radwalk.inference.star import seed_for
    from radwalk.results.products import FitProducts

    folder = Path(folder)
    doc = read_document(folder / STAR_SUMMARY) or {}
    out = {}
    laws = doc.get("comparison") or {}
    for k, op in enumerate(config.opacity_names()):
        if (laws.get(op) or {}).get("status") == "failed":
            continue  # a law that could not fit the star has no chain (radwalk.inference.fit.fit_laws)
        chain = stored_chain(folder / chain_file_name(op, primary=k == 0),
                             doc.get("sampler") if op == doc.get("opacity") else (laws.get(op) or {}).get("sampler"))
        stages = stages_for(config, op)
        post = Posterior(stages, star.observations(), config, feh=star.feh)
        # the fit's seeds for this law, in the fit's order (fit_laws, fit_one)
        _, _, prior_seed = seed_for(config.seed, star.id).spawn(3)
        flat, _ = chain.flat()
        indep = post.draw_independent(np.random.default_rng(prior_seed), flat.shape[0], theta=flat)
        flat = np.column_stack([flat, indep])
        idx = _evenly(flat.shape[0], config.sampler.derived_samples)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ValidityWarning)  # the fit collected them into the summary
            derived, bands, r_rel, _, _ = derive(post, flat[idx], structures=False)
        all_params = post.params + [p for p, _ in post.independent]
        out[stages.opacity.name] = FitProducts(
            star=star, opacity=stages.opacity.name, chain=chain, derived_rows=idx,
            param_names=[p.name for p in all_params], param_labels=[p.latex or p.name for p in all_params],
            param_units=[p.unit for p in all_params], priors=post.priors + [pr for _, pr in post.independent],
            samples=flat, derived=derived, r_rel=r_rel, bands=bands, observed=star.user_values(),
            band_source=None if bands is not None else partial(band_structures, post, flat[idx]),
        )
    return out


def draw_stored_figures(star, config, folder) -> FiguresResult:
    """Draws a stored star's figures into its folder and records them in its summary.json.

    Never raises for the star's own problems (they come back as ``error``, and
    the star keeps its fit without figures).

    Raises
    ------
    EnvironmentProblem
        When the machine failed the drawing (no space left, an I/O error, out of memory).
    """
    from radwalk.report.figures import write_star_plots

    t0 = time.perf_counter()
    folder = Path(folder)
    try:
        doc = read_document(folder / STAR_SUMMARY)
        if doc is None:
            raise RadwalkError(f"no summary.json in {folder} (a worker that does not see the run folder?)")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ValidityWarning)  # the bands' warnings are collected below
            products = stored_products(star, config, folder)
            primary = next(iter(products.values()))  # the first law that fitted
            plots = write_star_plots(primary, folder, comparison=products if len(products) > 1 else None)
        # the same order as a fit that draws its own figures (radwalk.inference.fit.fit_star)
        doc["warnings"] = list(dict.fromkeys(list(doc.get("warnings") or []) + primary.band_notes))
        doc["plots"] = plots
        write_json(folder / STAR_SUMMARY, doc)
    except Exception as exc:  # noqa: BLE001 - one star's figures must not stop a catalog
        cause = environment_cause(exc)
        if cause:
            raise EnvironmentProblem(f"star {star.id!r}: {cause}") from None
        why = traceback.format_exception_only(type(exc), exc)[-1].strip()
        return FiguresResult(star.id, {}, why, time.perf_counter() - t0)
    return FiguresResult(star.id, plots, "", time.perf_counter() - t0)
