"""Derived quantities of posterior samples: transport quantities, profile bands, plugin quantities,
the posterior-predictive check and the reachability check of the best model.

Units come from the quantity catalogue (:mod:`radwalk.forward.quantities`):
every derived value leaves here in its output unit.
"""

from __future__ import annotations

import warnings

import numpy as np

from radwalk.errors import ModelError, PluginError, ValidityWarning
from radwalk.forward.quantities import CATALOGUE, quantity, register_plugin_quantity
from radwalk.inference.posterior import Posterior
from radwalk.physics.composition import mu
from radwalk.results.document import NO_REACH_FRACTION, NO_REACH_MODEL_ERRORS, NO_REACH_SIGMA
from radwalk.results.products import BAND_FIELDS, profile_bands


def check_reachable(post: Posterior, theta_map):
    """Raises ModelError when the best model is still far from a measured observable.

    ``theta_map`` is one point [ndim] or several [n, ndim] (the posterior's
    maximum and the chain's samples); of several, the one of highest
    likelihood is the best model.  Not the posterior's maximum alone: where
    the likelihood is broad (the model's own errors are large) the prior's
    density (log-uniform in Z, say) moves that maximum away from the data,
    while models that reach the data lie inside the priors all the same.

    A relation that can say why no star of it matches (an optional method
    ``unreachable_note(observed, opacity=..., Z=(lo, hi)) -> str | None``,
    given the observations, the bound opacity and the metallicities the
    priors allow) has its words added to the refusal.
    """
    theta = np.atleast_2d(theta_map)
    if theta.shape[0] > 1:
        with np.errstate(all="ignore"):
            ll = post.log_likelihood(theta)
        theta_map = theta[int(np.argmax(np.where(np.isnan(ll), -np.inf, ll)))]
    theta_map = np.asarray(theta_map).reshape(-1)
    pred = post.predict(theta_map[None, :])
    obs = post.observed
    floors = model_errors(post)
    for key in obs.present():
        p = float(pred[key][0])
        v, e = obs.values[key], obs.errors[key]
        slack = max(NO_REACH_FRACTION, NO_REACH_MODEL_ERRORS * floors.get(f"floor_{key}", 0.0))
        if not np.isfinite(p) or abs(p - v) / e > NO_REACH_SIGMA and abs(p - v) / v > slack:
            q = quantity(key)
            best = "none" if not np.isfinite(p) else f"{q.to_output(p):.4g} {q.output_unit}"
            note = _unreachable_note(post, theta_map)
            raise ModelError(
                f"{note} (relation {post.stages.relation.name!r}; closest model: {q.plain} = {best})" if note else
                 f"no model within the priors reaches {q.plain} = {q.to_output(v):.4g} {q.output_unit} "
                 f"(closest: {best}, with relation {post.stages.relation.name!r})"
            )


def _unreachable_note(post: Posterior, theta_map) -> str | None:
    """The relation's own words on why the observations lie outside its stars, or None."""
    note = getattr(post.stages.relation, "unreachable_note", None)
    if not callable(note):
        return None
    if "Z" in post.fixed:
        z_range = (float(post.fixed["Z"]), float(post.fixed["Z"]))
    else:
        prior = post.priors[post.names.index("Z")]
        z_range = (prior.lower, prior.upper)
    values = post.values(theta_map[None, :])
    return note(post.observed, opacity=post.stages.bound_opacity(values), Z=z_range)


def derive(post: Posterior, samples: np.ndarray, structures: bool = True):
    """Transport quantities and predictions on the given samples; also profile bands.

    Parameters
    ----------
    post : Posterior
    samples : ndarray [N, ndim]
        Sampled parameters followed by those drawn from their priors.
    structures : bool
        False: where the profile model has quantities of its own and no plugin adds derived quantities, no
        radial structure is solved (``bands`` and ``r_rel`` are then None unless the profile model stores
        profiles, :meth:`radwalk.forward.stages.StageSet.quick_bands`): the scalars at the posterior maximum
        need none, and a solved star costs seconds.

    Returns
    -------
    derived : dict
        name -> [n] in output units, over the n samples that gave a model star.
        With a profile model that has quantities of its own
        (:meth:`radwalk.forward.stages.StageSet.quick_quantities`) these are its
        quantities; plugin quantities, which need the radial structure, are then
        given on the band samples only (NaN elsewhere).
    bands : dict
        field -> [5, g], the :data:`radwalk.results.products.BAND_PERCENTILES` of each profile field: over
        every sample when the profile model stores profiles (the track grid), else over the band samples
        only (:func:`band_rows`) for a profile model with quantities of its own.
    r_rel : ndarray [g]
        The bands' grid in r/R (the samples' own when they share one, else their median grid:
        :func:`radwalk.results.products.profile_bands`).
    notes : list of str
        Validity warnings.
    ok : ndarray of bool [N]
        Samples that gave a model star.
    """
    vals = post.values(samples)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ValidityWarning)
        pred = post.stages.predict(vals)
        ok = np.isfinite(pred["radius"]) & np.isfinite(pred["luminosity"])
        vals_ok = {kk: (v[ok] if np.ndim(v) else v) for kk, v in vals.items()}
        n_ok = int(ok.sum())
        quick = post.stages.quick_quantities(vals_ok) if n_ok else None
        plugin_hooks = bool(post.stages.registry.derived_hooks().get_hookimpls())
        # A profile model with quantities of its own (read off a grid) gives them for every sample, and may give
        # the bands' radial profiles too (interpolated in the grid, for every sample); otherwise its structures,
        # slow to solve, are solved only for the evenly spaced few the bands need.
        grid_bands = _grid_bands(post, vals_ok) if quick is not None and not plugin_hooks else None
        rows = np.arange(n_ok) if quick is None else band_rows(n_ok, post.stages.profile)
        vals_band = vals_ok if quick is None else {kk: (v[rows] if np.ndim(v) else v) for kk, v in vals_ok.items()}
        skip = quick is not None and not plugin_hooks and (grid_bands is not None or not structures)
        prof, tr = (None, None) if skip else post.stages.structure(vals_band, pred["radius"][ok][rows],
                                                                    pred["luminosity"][ok][rows])
    notes = [str(w.message) for w in caught]
    if grid_bands is not None:
        notes += grid_bands[2]
    notes += post.stages.validity_messages(vals_ok, prof)
    derived = {}
    for key in ("radius", "luminosity", "teff"):
        derived[key] = pred[key][ok] * quantity(key).factor
    derived["mu"] = np.broadcast_to(mu(vals_ok["X"], vals_ok["Z"]), (n_ok,)).copy()
    if post.hydrogen_tied:  # X follows Z by the model's rule: not sampled, but the star's composition all the same
        derived["X"] = np.broadcast_to(np.asarray(vals_ok["X"], dtype=float), (n_ok,)).copy()
    for key, v in (tr.scalars if quick is None else quick).items():
        derived[key] = v * (CATALOGUE[key].factor if key in CATALOGUE else 1.0)
    if grid_bands is not None:
        return derived, grid_bands[1], grid_bands[0], notes, ok
    if prof is None:
        return derived, None, None, notes, ok
    for key, v in plugin_quantities(post.stages, prof, vals_band, tr, set(derived)).items():
        derived[key] = v if quick is None else _spread(v, rows, n_ok)
    r_rel, bands = _bands_of(prof, tr)
    return derived, bands, r_rel, notes, ok


def _bands_of(prof, tr):
    """(r_rel [g], bands: field -> [5, g]) of solved structures."""
    fields = {"rho": prof.rho, "T": prof.T, "convective": np.asarray(tr.convective, dtype=float), **tr.fields}
    return profile_bands(prof.r / prof.R[:, None], {f: fields[f] for f in BAND_FIELDS})


def _grid_bands(post: Posterior, vals_ok: dict):
    """Profile bands over every sample from the profile model's stored profiles, or None when it has none.

    Returns
    -------
    (r_rel [g], bands: field -> [5, g], notes: list of str) or None
        The notes say where more of the stars' mass than the stated threshold lies outside the opacity law's
        range, as for solved structures.
    """
    out = post.stages.quick_bands(vals_ok)
    if out is None:
        return None
    r_rel, fields = out
    good = np.all(np.isfinite(fields["rho"]) & np.isfinite(fields["T"]), axis=1)
    if not good.any():
        return None
    fields = {name: np.asarray(v, dtype=float)[good] for name, v in fields.items()}
    n = int(good.sum())
    X = np.broadcast_to(np.asarray(vals_ok["X"], dtype=float), (good.size,))[good]
    Z = np.broadcast_to(np.asarray(vals_ok["Z"], dtype=float), (good.size,))[good]
    notes = post.stages.opacity_range_messages(fields["rho"], fields["T"], X, Z, fields["mass"])
    grid, bands = profile_bands(np.broadcast_to(r_rel, (n, r_rel.size)), {f: fields[f] for f in BAND_FIELDS})
    return grid, bands, notes


def band_structures(post: Posterior, samples: np.ndarray):
    """The profile bands of samples whose scalars came without structures (``derive(..., structures=False)``).

    Solves the radial structure of the :func:`band_rows` of the samples that give a model star, as
    :func:`derive` would have: the figures ask for it only when they are drawn.

    Returns
    -------
    r_rel : ndarray [g]
    bands : dict
        field -> [5, g]
    notes : list of str
        Validity warnings raised while solving them.
    """
    vals = post.values(samples)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ValidityWarning)
        pred = post.stages.predict(vals)
        ok = np.isfinite(pred["radius"]) & np.isfinite(pred["luminosity"])
        rows = band_rows(int(ok.sum()), post.stages.profile)
        vals_band = {kk: (v[ok][rows] if np.ndim(v) else v) for kk, v in vals.items()}
        prof, tr = post.stages.structure(vals_band, pred["radius"][ok][rows], pred["luminosity"][ok][rows])
    r_rel, bands = _bands_of(prof, tr)
    return r_rel, bands, [str(w.message) for w in caught]


def band_rows(n: int, profile) -> np.ndarray:
    """Indices of the samples whose radial structure is solved for the bands: ``profile.band_samples`` of
    the ``n``, evenly spaced (the samples are a thinned chain, so evenly spaced rows are a fair draw)."""
    k = max(1, int(getattr(profile, "band_samples", n)))
    if n <= k:
        return np.arange(n)
    return np.linspace(0, n - 1, k).round().astype(int)


def _spread(values, rows, n: int) -> np.ndarray:
    """[len(rows)] values put at ``rows`` of an [n] array of NaN."""
    out = np.full(n, np.nan)
    out[rows] = values
    return out


def plugin_quantities(stages, profile, values, tr, taken: set) -> dict:
    """Quantities added by plugins' ``radwalk_derived_quantities`` hooks, name -> [n]."""
    hook = stages.registry.derived_hooks()
    if not hook.get_hookimpls():
        return {}
    out = {}
    for extra in hook(profile=profile, opacity=stages.bound_opacity(values), quantities=dict(tr.scalars)):
        for name, item in (extra or {}).items():
            try:
                arr, unit, _desc = item
            except (TypeError, ValueError):
                raise PluginError(f"derived quantity {name!r} must be (values, unit, description)") from None
            if name in taken or name in out:
                raise PluginError(f"derived quantity {name!r} is already defined; choose another name")
            arr = np.broadcast_to(np.asarray(arr, dtype=float), (profile.n,)).copy()
            register_plugin_quantity(name, unit)
            out[name] = arr
    return out


def model_errors(post: Posterior) -> dict:
    """The likelihood's fractional model errors ``floor_<observable>`` as the run sets them (name -> float)."""
    floors = {p.name: float(p.default) for p in post.stages.likelihood.params if p.name.startswith("floor_")}
    floors.update({kk: float(v) for kk, v in post.fixed.items() if kk.startswith("floor_")})
    return floors


def ppc_pvalue(post: Posterior, samples, rng: np.random.Generator):
    """Posterior-predictive p-value of chi^2: replicated data as extreme as the observed."""
    pred = post.predict(samples)
    obs = post.observed
    floors = model_errors(post)
    chi_obs = np.zeros(samples.shape[0])
    chi_rep = np.zeros(samples.shape[0])
    for key in obs.present():
        v, e = obs.values[key], obs.errors[key]
        sigma = np.sqrt(e**2 + (floors.get(f"floor_{key}", 0.0) * v) ** 2)
        rep = pred[key] + sigma * rng.standard_normal(samples.shape[0])
        chi_obs += ((v - pred[key]) / sigma) ** 2
        chi_rep += ((rep - pred[key]) / sigma) ** 2
    good = np.isfinite(chi_obs)
    return float(np.mean(chi_rep[good] >= chi_obs[good])) if good.any() else float("nan")
