"""The per-star task: (star, config, seed) -> StarResult, a pure function.

Samples the posterior, computes the derived quantities
(:mod:`radwalk.inference.derived`) on every thinned sample (up to
``sampler.derived_samples`` of them, evenly spaced), writes the star's folder
(:mod:`radwalk.results.layout`: chain.h5, plots, summary.json last, which
marks it done) and returns a small picklable summary.
"""

from __future__ import annotations

import time
import traceback
import warnings
from dataclasses import dataclass, field
from functools import lru_cache, partial
from pathlib import Path

import numpy as np

from radwalk.errors import (
    CatalogError,
    ConfigError,
    EnvironmentProblem,
    ModelError,
    PluginError,
    RadwalkError,
    ValidityWarning,
    environment_cause,
)
from radwalk.forward import disk_memo
from radwalk.forward.quantities import output_unit
from radwalk.forward.stages import StageSet
from radwalk.host.config import RunConfig, refuse_sampled_opacity
from radwalk.host.registry import Registry
from radwalk.inference.derived import band_structures, check_reachable, derive, ppc_pvalue
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import run_chain
from radwalk.inference.star import Star, seed_for
from radwalk.results.chain import describe_chain_file
from radwalk.results.document import PERCENTILES, PPC_POOR, result_document
from radwalk.results.files import remove_leftovers, write_json
from radwalk.results.layout import STAR_SUMMARY, chain_file_name
from radwalk.results.products import FitProducts


@dataclass
class StarResult:
    """What a per-star task returns (picklable, small)."""

    id: str
    status: str  # "ok", "not-converged", "failed"
    reason: str = ""
    summary: dict = field(default_factory=dict)
    seconds: float = 0.0


@lru_cache(maxsize=8)
def registry_for(plugins: tuple) -> Registry:
    """One registry per plugin set and process (workers reuse it across stars)."""
    return Registry(plugin_files=plugins)


def stages_for(config: RunConfig, opacity: str | None = None) -> StageSet:
    reg = registry_for(tuple(config.plugins))
    names = config.stage_names(opacity)
    probe = StageSet.build(reg, names)  # to learn which settings are options
    opts = {}
    for key, value in config.settings.items():
        # every component that declares the option gets it (a profile and a relation may share a grid's options)
        for comp in probe.components().values():
            if key in {o.name for o in getattr(comp, "options", ())}:
                opts.setdefault(comp.name, {})[key] = value
    stages = StageSet.build(reg, names, opts)
    # before any grid is built or any sampling starts; a sampled law is solved directly, not gridded per value
    stages.solve_directly = bool(refuse_sampled_opacity(config, stages))
    law = stages.opacity.name
    check_opacity_contract(tuple(config.plugins), law, tuple(sorted(opts.get(law, {}).items())))
    return stages


# Not "units" (a law below the electron-scattering floor, as a law in m^2/kg is): a fit must stay free to try a
# law that is low on purpose (a what-if, or a comparison against a law ten times too transparent), and
# `radwalk check-plugin` names such a law with "check the units".  Not "star" either: it solves four stars,
# about 2 s of CPU in every fresh process for a plugin's law, near half a star's fit.
PROBE_CHECKS = ("configure", "call", "shape", "finite", "positive", "inputs")
PROBE_POINTS = 24


@lru_cache(maxsize=32)
def check_opacity_contract(plugins: tuple, name: str, options: tuple = ()) -> None:
    """Raises PluginError naming the law and its first bad point if it breaks its contract.

    The contract checks of :data:`PROBE_CHECKS` (those of ``radwalk
    check-plugin``, :mod:`radwalk.host.contracts`) on a coarse grid over the
    law's own validity range, once per process and law: a law that returns
    NaN, zero, negative or wrongly shaped values is named at once, instead of
    surfacing as a sampler that finds no finite posterior.
    """
    reg = registry_for(plugins)
    entry = reg.entries["opacity"][name]
    memo_key = _passed_probe_key(entry, options)
    if memo_key is not None and memo_key in disk_memo.load("opacity-contract"):
        return
    from radwalk.host.contracts import check_component

    report = check_component(entry, grid_points=PROBE_POINTS, options=dict(options) or None, registry=reg,
                             checks=PROBE_CHECKS)
    bad = report.failed()
    if bad:
        raise PluginError(
            f"opacity {name!r} ({entry.source}) fails the {bad[0].check!r} check inside its own validity "
            f"range: {bad[0].detail}; `radwalk check-plugin` prints the full table",
            plugin=entry.source,
        )
    if memo_key is not None:
        disk_memo.save("opacity-contract", {memo_key: True})


def _passed_probe_key(entry, options: tuple) -> str | None:
    """Key under which a built-in law's passed probe is kept in the cache folder (None: probe every time).

    The probe costs about 0.14 s of CPU in every fresh process and its outcome
    depends only on the law's source and the physics modules it imports, the
    contract checks (every module of :mod:`radwalk.host`) and the numpy and
    scipy versions: all are in the key.  Probed every time: a plugin's law (the
    modules it imports from outside radwalk are seen by no hash) and a law given
    options (an option may name a file, such as the tabulated law's table,
    whose content no hash here sees).
    """
    if entry.source != "built-in" or options:
        return None
    import hashlib
    import inspect
    import json
    import sys

    import scipy

    from radwalk.forward.model_grid import solver_sources

    module = inspect.getmodule(type(entry.component))
    host = Path(__file__).resolve().parent.parent / "host"
    sources = {p.relative_to(host).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
               for p in sorted(host.rglob("*.py"))}
    sources[module.__name__] = hashlib.sha256(Path(module.__file__).read_bytes()).hexdigest()
    sources.update(solver_sources(module.__name__))
    ident = {"law": entry.component.name, "checks": PROBE_CHECKS, "points": PROBE_POINTS,
             "sources": sources, "numpy": np.__version__, "scipy": scipy.__version__,
             "python": sys.version.split()[0]}
    return hashlib.sha256(json.dumps(ident, sort_keys=True).encode()).hexdigest()


def _percentiles(x):
    x = x[np.isfinite(x)]
    if x.size == 0:
        return [float("nan")] * 3
    return [float(v) for v in np.percentile(x, PERCENTILES)]


def _evenly(n_total: int, n_keep: int):
    if n_total <= n_keep:
        return np.arange(n_total)
    return np.linspace(0, n_total - 1, n_keep).round().astype(int)


def fit_one(star: Star, config: RunConfig, seed: np.random.SeedSequence, opacity: str | None = None,
            chain_path=None, progress=None) -> tuple[dict, FitProducts]:
    """Samples one star under one opacity law; returns its summary and in-memory products.

    ``progress(law, steps, tau)``, when given, is called after each chunk of sampler steps.
    """
    stages = stages_for(config, opacity)
    post = Posterior(stages, star.observations(), config, feh=star.feh)
    chain_seed, ppc_seed, prior_seed = seed.spawn(3)
    step = None if progress is None else (lambda steps, tau: progress(opacity, steps, tau))
    chain = run_chain(post, config.sampler, chain_seed, chain_path=chain_path, progress=step)
    flat, flat_lp = chain.flat()
    check_reachable(post, np.vstack([chain.map_theta[None, :], flat]))  # the best-fitting of them is judged
    indep = post.draw_independent(np.random.default_rng(prior_seed), flat.shape[0], theta=flat)
    flat = np.column_stack([flat, indep])
    idx = _evenly(flat.shape[0], config.sampler.derived_samples)
    # No solved structure where the profile model has its own scalars (the track grid): its bands come from its
    # stored profiles, or, without them, from structures solved (seconds each) only when the figures ask for them
    # (FitProducts.ensure_bands).
    derived, bands, r_rel, notes, ok = derive(post, flat[idx], structures=False)
    pval = ppc_pvalue(post, flat[idx], np.random.default_rng(ppc_seed))

    warn = list(dict.fromkeys(notes))
    if star.luminosity_derived and star.luminosity_used:
        warn.append(star.luminosity_note())
    if not chain.converged:
        warn.append(f"not converged: {chain.reason}")
    if np.isfinite(pval) and pval < PPC_POOR:
        warn.append(f"poor fit: posterior-predictive p-value {pval:.3g} < {PPC_POOR}")
    if not ok.all():
        warn.append(f"{int((~ok).sum())} of {ok.size} samples gave no model star and were left out")

    all_params = post.params + [p for p, _ in post.independent]
    all_priors = post.priors + [pr for _, pr in post.independent]
    widths = np.concatenate([post.prior_widths(), indep.std(axis=0) if indep.size else np.zeros(0)])
    params = {}
    ess = chain.effective_sample_size()
    for j, p in enumerate(all_params):
        x = flat[:, j]
        p16, p50, p84 = _percentiles(x)
        ratio = float(np.std(x) / widths[j]) if widths[j] > 0 else float("nan")
        sampled = j < post.ndim
        params[p.name] = {
            "unit": p.unit, "p16": p16, "p50": p50, "p84": p84,
            "map": float(chain.map_theta[j]) if sampled else float("nan"),
            "tau": float(chain.tau[j]) if sampled else float("nan"),
            "ess": float(ess[j]) if sampled else float(x.size), "prior": all_priors[j].describe(),
            "posterior_over_prior_width": ratio, "constrained": bool(ratio < 0.5),
            "drawn_from_prior": not sampled,
        }
    map_derived = {}
    try:
        md, _, _, _, mok = derive(post, chain.map_theta[None, :], structures=False)
        if mok.all():
            map_derived = {kk: float(v[0]) for kk, v in md.items()}
    except RadwalkError:
        pass
    dq = {}
    for key, v in derived.items():
        p16, p50, p84 = _percentiles(v)
        dq[key] = {"unit": output_unit(key), "p16": p16, "p50": p50, "p84": p84,
                   "map": map_derived.get(key, float("nan"))}
    unconstrained = [n for n, d in params.items() if not d["constrained"]]
    summary = {
        "opacity": stages.opacity.name,
        "stages": {s: c.name for s, c in stages.components().items()},
        "parameters": params,
        "fixed": {kk: float(v) for kk, v in post.fixed.items()},
        "derived": dq,
        "sampler": {
            "walkers": config.sampler.walkers, "steps": chain.steps, "burn": chain.burn, "thin": chain.thin,
            "acceptance": chain.acceptance, "tau_max": float(np.max(chain.tau)), "converged": chain.converged,
            "reason": chain.reason, "samples": int(flat.shape[0]), "derived_samples": int(idx.size),
            "map_log_prob": chain.map_log_prob,
        },
        "ppc_pvalue": pval,
        "unconstrained": unconstrained,
        "warnings": warn,
    }
    products = FitProducts(
        star=star, opacity=stages.opacity.name, chain=chain, derived_rows=idx, param_names=[p.name for p in all_params],
        param_labels=[p.latex or p.name for p in all_params], param_units=[p.unit for p in all_params],
        priors=all_priors, samples=flat, derived=derived, r_rel=r_rel, bands=bands,
        observed=star.user_values(),
        band_source=None if bands is not None else partial(band_structures, post, flat[idx]), derived_ok=ok,
    )
    return summary, products


LAW_FAILURES = (CatalogError, ModelError, ConfigError, PluginError)  # a law's own failure to fit a star


def law_failure(opacity: str, exc: Exception) -> str:
    """One line naming the opacity law that could not fit the star and why."""
    why = " ".join(str(exc).split())
    return f"opacity law {opacity!r} failed: {'plugin error: ' if isinstance(exc, PluginError) else ''}{why}"


def _law_entry(fit: dict) -> dict:
    """A law's entry of the ``comparison`` section: its fit's summary, with its own status and reason."""
    converged = fit["sampler"]["converged"]
    return {"status": "ok" if converged else "not-converged", "reason": "" if converged else fit["sampler"]["reason"],
            **{k: v for k, v in fit.items() if k not in ("stages", "fixed")}}


def fit_laws(star: Star, config: RunConfig, folder: Path | None = None, progress=None) -> tuple[dict, dict]:
    """Fits one star under every opacity law of the config.

    Returns the summary (the first law's that fitted, with a ``comparison``
    section when there are several laws) and the in-memory products of every
    law that fitted.  With a ``folder``, each law's chain is written there as
    it grows.

    A law that cannot fit the star (a :data:`LAW_FAILURES` error) does not cost
    the others their fits: its ``comparison`` entry has status ``failed`` and
    the reason (:func:`law_failure`), and the summary's warnings name it.  When
    the run's first law is the one that failed, the summary's ``opacity`` names
    the law whose fit it gives.

    Raises
    ------
    ModelError, CatalogError, ConfigError, PluginError
        When the only law, or every law, fails (several: a ModelError naming each).
    """
    laws = config.opacity_names()
    fits, products, failed, errors = {}, {}, {}, {}
    for j, op in enumerate(laws):
        chain_path = None
        if folder is not None:
            chain_path = folder / chain_file_name(op, primary=j == 0, partial=True)
        try:
            # every law gets the same fresh seed, so a comparison is paired and order-free
            fits[op], products[op] = fit_one(star, config, seed_for(config.seed, star.id), op, chain_path, progress)
        except LAW_FAILURES as exc:
            if len(laws) == 1:
                raise
            failed[op], errors[op] = law_failure(op, exc), exc
            if chain_path is not None:
                chain_path.unlink(missing_ok=True)  # the failed law's half chain is no result
    if not fits:
        raise ModelError("; ".join(failed[op] for op in laws))
    lead = next(op for op in laws if op in fits)
    summary = dict(fits[lead])
    if len(laws) > 1:
        summary["comparison"] = {op: _law_entry(fits[op]) if op in fits else
                                 {"status": "failed", "reason": failed[op], "warnings": []} for op in laws}
        stand_in = f" (the star's results are those of {lead!r})" if lead != laws[0] else ""
        summary["warnings"] = [f"{failed[op]}{stand_in if op == laws[0] else ''}" for op in failed] + \
            list(summary["warnings"])
    if folder is not None:
        for j, op in enumerate(laws):
            if op not in fits:
                continue
            part = folder / chain_file_name(op, primary=j == 0, partial=True)
            describe_chain_file(part, products[op], fits[op], config.seed)  # units, provenance, derived samples
            part.replace(folder / chain_file_name(op, primary=j == 0))
    return summary, products


def fit_star(star: Star, config: RunConfig, outdir=None, plots: bool = True, progress=None) -> StarResult:
    """The per-star task.  Never raises for a star's own problems: they become status 'failed'.

    ``progress(law, steps, tau)``, when given, is called after each chunk of sampler steps.

    Raises
    ------
    EnvironmentProblem
        When the machine failed the star (no space left, an I/O error, out of
        memory): no summary.json is written, so a later run computes the star.
    """
    t0 = time.perf_counter()
    folder = Path(outdir) if outdir else None
    if folder is not None:
        remove_leftovers(folder)  # half-written files of an earlier, killed attempt at this star
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ValidityWarning)  # collected into the summary instead
            summary, products = fit_laws(star, config, folder, progress)
        primary = next(iter(products))  # the first law that fitted (one that failed is named in the warnings)
        status = "ok" if summary["sampler"]["converged"] else "not-converged"
        reason = "" if status == "ok" else summary["sampler"]["reason"]
        if folder is not None:
            if plots:
                from radwalk.report.figures import write_star_plots

                summary["plots"] = write_star_plots(products[primary], folder,
                                                    comparison=products if len(products) > 1 else None)
                # Warnings of the structures the profile bands solved (drawn only now) join the star's.
                summary["warnings"] = list(dict.fromkeys(summary["warnings"] + products[primary].band_notes))
    except (CatalogError, ModelError, ConfigError) as exc:
        status, reason, summary = "failed", str(exc), {}
    except PluginError as exc:
        status, reason, summary = "failed", f"plugin error: {exc}", {}
    except Exception as exc:  # noqa: BLE001 - one star's crash must not stop a catalog
        cause = environment_cause(exc)
        if cause:
            raise EnvironmentProblem(f"star {star.id!r}: {cause}") from None
        tb = traceback.format_exception_only(type(exc), exc)[-1].strip()
        status, reason, summary = "failed", f"internal error: {tb}", {}
    result = StarResult(star.id, status, reason, summary, time.perf_counter() - t0)
    if folder is not None:
        try:
            write_json(folder / STAR_SUMMARY, result_document(star, config, result))
        except OSError as exc:
            cause = environment_cause(exc)
            if cause:
                raise EnvironmentProblem(f"star {star.id!r}: {cause}") from None
            raise
    return result
