"""One compiled log-posterior for the built-in track-grid stages, evaluated over all walkers in one call.

The general :class:`radwalk.inference.posterior.Posterior` asks each stage in
turn -- three priors, the composition rule, the [Fe/H] prior, the support
and age-prior term of the track grid, the grid interpolation of every stored
quantity, the likelihood -- about forty small numpy calls on arrays of 16
walkers, most of their cost being the calls themselves.  When every stage is
a built-in one whose arithmetic is known (the ``track-grid`` relation, the
``track-grid`` profile or a profile without joint terms, the ``gaussian``
likelihood, any opacity law held fixed, priors of the built-in kinds), this
module evaluates the same posterior in one compiled loop over the walkers
(numba): per walker, the priors, X from Z by the grid's composition rule,
the [Fe/H] term, the Lagrange stencils in log M and log Z, the interpolated
main-sequence lifetime and with it the support (0 <= age <= min(t_MS,
13.8 Gyr)) and the age-prior term -log min(t_MS, 13.8 Gyr), R and L
interpolated at the phase age / t_MS (only those two of the grid's
quantities), T_eff from L = 4 pi R^2 sigma T_eff^4, and the Gaussian
likelihood with the model-error floors.  Nothing is approximated: it is
the general path's arithmetic in another order, equal to it to rounding
(tests/inference/test_fused.py holds it to 1e-10 on random points, -inf
outside the support included).

Anything else -- a plugin component, a sampled opacity parameter, a prior
kind added later -- keeps the general path: :func:`fused_log_prob` returns
None and :func:`why_not_fused` says why.  Components opt in by declaring
``fused_model`` on their own class (:func:`declares`).

The kernel is compiled once and cached on disk beside this module by numba
(``cache=True``), so a new process loads it instead of compiling it.
"""

from __future__ import annotations

import math

import numpy as np

from radwalk import constants as k

__all__ = ["FusedGridLogProb", "declares", "fused_log_prob", "why_not_fused"]

_PRIOR_CODES = {"uniform": 0, "log-uniform": 1, "normal": 2, "truncated-normal": 2, "salpeter": 3, "kroupa": 4}
_GYR = 1e9 * k.YEAR
_KERNEL = None  # compiled on first use (importing numba costs ~0.4 s, paid only by fits that use it)


def _prior_row(prior) -> list:
    """(code, lower, upper, mean, sigma, constant) of a built-in prior kind, as the kernel reads it."""
    code = _PRIOR_CODES[prior.kind]
    const = 0.0
    if prior.kind == "uniform":
        const = -math.log(prior.upper - prior.lower)
    elif prior.kind == "log-uniform":
        const = -math.log(math.log(prior.upper / prior.lower))
    mean = prior.mean if prior.mean is not None else 0.0
    sigma = prior.sigma if prior.sigma is not None else 1.0
    return [code, prior.lower, prior.upper, mean, sigma, const]


def declares(component, model: str) -> bool:
    """Whether ``component``'s own class (not a parent's) declares ``fused_model = model``.

    A built-in component states with ``fused_model`` that its arithmetic is the one this module fuses
    (``"track-grid"``: the relation's prediction, support, age-prior term and composition rule, or the
    profile's support and composition rule, all on ``self.grid(opacity)``; ``"gaussian"``: the Gaussian
    likelihood with the ``floor_*`` model errors).  Only the class's own body counts, so a subclass that
    overrides a method falls back to the general path unless it declares the model again.
    """
    return type(component).__dict__.get("fused_model") == model


def why_not_fused(post) -> str | None:
    """Why ``post`` cannot use the fused path, in words; None when it can.

    Parameters
    ----------
    post : radwalk.inference.posterior.Posterior
    """
    st = post.stages
    if not declares(st.relation, "track-grid"):
        return f"relation {st.relation.name!r} is not the built-in track grid"
    if not declares(st.likelihood, "gaussian"):
        return f"likelihood {st.likelihood.name!r} is not the built-in Gaussian"
    grid_profile = declares(st.profile, "track-grid")
    if grid_profile and st.profile.options_key != st.relation.options_key:
        return "the profile and the relation read different track grids"
    own = {"relation"} | ({"profile"} if grid_profile else set())
    if not set(st.support_stages()) <= own:
        return f"stages {sorted(set(st.support_stages()) - own)} declare their own support"
    if st.prior_density_stages() != ["relation"]:
        return "a stage other than the relation adds a joint prior term"
    if st.hydrogen_stage() not in own:
        return "X is set by a composition rule other than the track grid's"
    extra = set(post.names) - {"mass", "Z", "age"}
    if extra:
        return f"parameters {sorted(extra)} are sampled (only mass, Z and age are fused)"
    for name in ("mass", "Z", "age"):
        if name not in post.names and np.ndim(post.fixed.get(name, 0.0)) != 0:
            return f"{name} is held at a non-scalar value"
    for name, prior in zip(post.names, post.priors):
        if prior.kind not in _PRIOR_CODES:
            return f"prior kind {prior.kind!r} of {name!r} is not fused"
    return None


def _compile():
    """The kernel, compiled (or loaded from numba's on-disk cache) once per process."""
    global _KERNEL
    if _KERNEL is None:
        from radwalk.inference._fused_kernel import log_posterior

        _KERNEL = log_posterior
    return _KERNEL


class FusedGridLogProb:
    """The log-posterior of :class:`~radwalk.inference.posterior.Posterior` for the built-in track-grid stages.

    Call it as the posterior: ``theta [n, ndim] -> [n]``, ``-inf`` outside the
    support, never NaN.

    Parameters
    ----------
    post : radwalk.inference.posterior.Posterior
        A posterior :func:`why_not_fused` accepts.
    """

    def __init__(self, post):
        from radwalk.inference import _fused_kernel as kern

        st = post.stages
        probe = post.values(np.array([[p.default for p in post.params]]))
        grid = st.relation.grid(st.bound_opacity(probe))
        names = list(grid.names)
        qr, ql = names.index("radius"), names.index("luminosity")
        if not (grid._log[qr] and grid._log[ql]):
            raise ValueError("the grid stores radius or luminosity linearly; the fused path expects log10")
        ints = np.zeros(kern.N_INTS, dtype=np.int64)
        floats = np.zeros(kern.N_FLOATS)
        for j, name in enumerate(("mass", "Z", "age")):
            if name in post.names:
                ints[kern.I_COL + j] = post.names.index(name)
            else:
                ints[kern.I_COL + j] = -1
                floats[kern.F_FIXED + j] = float(post.fixed[name])
        rule = grid.header.get("composition_rule", {})
        ints[kern.I_FIXED_X] = rule.get("rule") == "fixed X"
        if ints[kern.I_FIXED_X]:
            floats[kern.F_X] = float(rule["X"])
        else:
            floats[kern.F_YP], floats[kern.F_DYDZ] = float(rule["Y_p"]), float(rule["dY_dZ"])
        ints[kern.I_CHECK_XZ] = bool(post._xz_may_exceed_one)
        if post.feh is not None:
            ints[kern.I_FEH] = 1
            floats[kern.F_FEH_MEAN], floats[kern.F_FEH_SIGMA] = float(post.feh[0]), float(post.feh[1])
        floats[kern.F_SOLAR_ZX] = float(post.solar_log_zx)
        axes = []
        for ax, i_s, f_tol in ((grid._m, kern.I_MS, kern.F_MTOL), (grid._z, kern.I_ZS, kern.F_ZTOL)):
            ints[i_s], floats[f_tol] = ax.s, ax.tol
            inv = np.ones((1, 1)) if ax.n == 1 else ax.inv_den
            axes += [np.ascontiguousarray(ax.nodes, dtype=float), np.ascontiguousarray(inv, dtype=float)]
        ints[kern.I_NZ], ints[kern.I_NPHASE] = grid.shape[1], grid.shape[2]
        floats[kern.F_AGE_CAP], floats[kern.F_GYR] = float(st.relation.age_cap), _GYR
        floats[kern.F_FOUR_PI_SIGMA] = 4.0 * math.pi * k.SIGMA_SB
        # the likelihood's sigmas: measurement and model error (its floor_* settings, declared with their
        # defaults) in quadrature, as radwalk.plugins.likelihoods._residuals
        obs = post.observed
        floors = {p.name: p.default for p in st.likelihood.params}
        floors.update({n: post.fixed[n] for n in post._lik_names if n in post.fixed})
        for j, key in enumerate(("radius", "luminosity", "teff")):
            value = obs.values.get(key, np.nan)
            if not np.isfinite(value):
                continue
            floor = float(floors[f"floor_{key}"])
            sigma = math.sqrt(obs.errors[key] ** 2 + (floor * value) ** 2)
            ints[kern.I_PRESENT + j] = 1
            floats[kern.F_OBS + j], floats[kern.F_SIG + j] = value, sigma
            floats[kern.F_LOG_SIG] += math.log(sigma)
        self.grid = grid
        self._args = (ints, floats, np.array([_PRIOR_CODES[p.kind] for p in post.priors], dtype=np.int64),
                      np.array([_prior_row(p) for p in post.priors], dtype=float).reshape(len(post.priors), 6),
                      *axes, np.ascontiguousarray(grid._log_life, dtype=float),
                      np.ascontiguousarray(grid.table[..., qr], dtype=float).ravel(),
                      np.ascontiguousarray(grid.table[..., ql], dtype=float).ravel())
        self._kernel = _compile()
        prior_ints = ints.copy()
        prior_ints[kern.I_PRIOR_ONLY] = 1
        self._prior_args = (prior_ints, *self._args[1:])

    def __call__(self, theta) -> np.ndarray:
        """Log-posterior, [n]."""
        return self._run(theta, self._args)

    def log_prior(self, theta) -> np.ndarray:
        """Log prior (declared priors, [Fe/H], the support and the age-prior term), [n]."""
        return self._run(theta, self._prior_args)

    def _run(self, theta, args) -> np.ndarray:
        theta = np.ascontiguousarray(np.atleast_2d(theta), dtype=float)
        out = np.empty(theta.shape[0])
        self._kernel(theta, out, *args)
        return out


def fused_log_prob(post) -> FusedGridLogProb | None:
    """The fused log-posterior for ``post``, or None when its stages need the general path."""
    if why_not_fused(post) is not None:
        return None
    return FusedGridLogProb(post)
