"""The log-posterior of one star: priors from the components, likelihood of R, L, T_eff.

``Posterior(theta[nwalkers, ndim]) -> [nwalkers]`` is vectorised over walkers
(emcee's ``vectorize=True``), returns ``-inf`` outside the prior support or
where the relation finds no star, and never NaN.  With the built-in
track-grid stages a call runs one compiled loop (:mod:`radwalk.inference.fused`,
equal to :meth:`Posterior.general` to rounding); any other combination of
components takes the general path, stage by stage.  The support is that of each
parameter's prior together with the joint supports the components declare
(:meth:`radwalk.forward.stages.StageSet.support`: an age no greater than the
main-sequence lifetime of the mass, say); prior draws are kept inside it.
"""

from __future__ import annotations

import numpy as np

from radwalk.errors import ConfigError
from radwalk.forward.stages import StageSet
from radwalk.host.components import Observations, call_component
from radwalk.host.config import RunConfig
from radwalk.host.params import Prior

# Batches of prior draws (each 4 times the number wanted) tried before giving up on filling a declared support:
# enough for a support that holds 1/1000 of the prior.
_SUPPORT_ROUNDS = 250

# Pool of in-support draws per wanted draw when a joint prior term reweights them: the track grid's age prior
# weights masses by up to 13.8 Gyr / t_MS (~500 at 8 M_sun), and 8 pool draws per draw keep repeats rare.
_DENSITY_POOL = 8


class Posterior:
    """Log-posterior over the sampled parameters of a StageSet.

    Parameters
    ----------
    stages : StageSet
    observed : Observations
        Measured radius (cm), luminosity (erg/s), T_eff (K) and their errors.
    config : RunConfig
        Prior overrides and fixed settings.
    feh : tuple of float, optional
        Measured [Fe/H] and its error (dex): a prior on log10(Z/X) relative to
        the solar ratio of ``config.solar_z / config.solar_x``.
    """

    def __init__(self, stages: StageSet, observed: Observations, config: RunConfig,
                 feh: tuple[float, float] | None = None):
        self.stages = stages
        self.observed = observed
        self.feh = feh
        self.solar_log_zx = float(np.log10(config.solar_z / config.solar_x))
        declared = {p.name: p for p in stages.all_params()}
        numeric = {k: v for k, v in config.settings.items() if k not in stages.option_names()}
        for name in list(numeric) + list(config.priors):
            if name not in declared:
                stages.param(name)  # raises with a suggestion
        # A likelihood's model-error settings describe the model, not the star: one star cannot measure them,
        # so they are never sampled (a sampled error would only trade off against the star's parameters).
        settings_only = set(getattr(stages.likelihood, "fixed_params", ()))
        for name in config.priors:
            if name in settings_only:
                raise ConfigError(f"{name!r} of likelihood {stages.likelihood.name!r} is a fixed setting and "
                                  "cannot be sampled; set its value under [settings] instead of giving a prior")
        self.fixed = {}
        self.names = []
        self.priors: list[Prior] = []
        # Parameters of the profile alone never reach the likelihood (the relation predicts R and L without
        # the profile), so their posterior is their prior: they are drawn from it directly after sampling
        # instead of being random-walked by emcee, which only lengthens the chain.  A parameter the profile
        # shares with another stage (an age both the profile and the relation take) is sampled.
        self.independent: list[tuple] = []
        elsewhere = {p.name for s in ("opacity", "relation", "likelihood") for p in getattr(stages, s).params}
        profile_names = {p.name for p in stages.profile.params} - elsewhere
        # X set by a component's composition rule (a track grid) is computed from Z, never sampled.
        self.hydrogen_tied = stages.hydrogen_stage() is not None
        if self.hydrogen_tied and ("X" in numeric or "X" in config.priors):
            comp = getattr(stages, stages.hydrogen_stage())
            raise ConfigError(f"X cannot be set or given a prior with {stages.hydrogen_stage()} {comp.name!r}: "
                              "its stars take X from Z by their composition rule; free X with the 'solved' "
                              "profile and relation")
        for p in stages.all_params():
            if p.name == "X" and self.hydrogen_tied:
                continue
            if p.name in numeric and p.name not in config.priors:
                self.fixed[p.name] = p.check(numeric[p.name])
            elif p.sampled or p.name in config.priors:
                prior = config.priors.get(p.name, p.default_prior())
                if prior.lower < p.lower or prior.upper > p.upper:
                    raise ConfigError(
                        f"prior on {p.name!r} [{prior.lower:g}, {prior.upper:g}] reaches outside its allowed "
                        f"range [{p.lower:g}, {p.upper:g}] {p.unit}".rstrip()
                    )
                if p.name in profile_names:
                    self.independent.append((p, prior))
                else:
                    self.names.append(p.name)
                    self.priors.append(prior)
            else:
                self.fixed[p.name] = p.default
        self.params = [declared[n] for n in self.names]
        # X + Z <= 1 needs checking only where the priors (or fixed values) allow more
        top = {n: pr.upper for n, pr in zip(self.names, self.priors)}
        top.update({n: v for n, v in self.fixed.items() if n in ("X", "Z")})
        self._xz_may_exceed_one = top.get("X", 1.0) + top.get("Z", 1.0) > 1.0
        self.ndim = len(self.names)
        self._lik_names = [p.name for p in stages.likelihood.params]
        self._has_support = bool(stages.support_stages())
        self._has_density = bool(stages.prior_density_stages())
        self._widths = None  # prior_widths(), drawn once
        self._fused = None  # the compiled path of radwalk.inference.fused, built on first call (False: none)

    # -- parameter vectors ----------------------------------------------
    def values(self, theta) -> dict:
        """Sampled and fixed values as a name -> [n] dict.

        ``theta`` holds the sampled parameters, optionally followed by the
        independent (prior-drawn) ones in the order of ``independent``; those
        not given are held at their defaults.
        """
        theta = np.atleast_2d(theta)
        # fixed values stay scalars: every stage broadcasts them against the [n] arrays
        vals = dict(self.fixed)
        for j, name in enumerate(self.names):
            vals[name] = theta[:, j]
        for j, (p, _) in enumerate(self.independent, start=self.ndim):
            vals[p.name] = theta[:, j] if theta.shape[1] > j else p.default
        if self.hydrogen_tied:
            vals["Z"] = np.broadcast_to(np.asarray(vals["Z"], dtype=float), (theta.shape[0],))
            vals["X"] = self.stages.hydrogen_fraction(vals)
        return vals

    def draw_independent(self, rng: np.random.Generator, size: int, theta=None) -> np.ndarray:
        """Draws of the prior-only parameters, [size, n_independent].

        With ``theta`` [size, ndim] (the sampled parameters they join), draws
        that fall outside a component's declared support are drawn again.
        """
        cols = [prior.sample(rng, size) for _, prior in self.independent]
        out = np.column_stack(cols) if cols else np.zeros((size, 0))
        if theta is None or not cols or not self._has_support:
            return out
        theta = np.atleast_2d(theta)
        for _ in range(_SUPPORT_ROUNDS):
            bad = ~self.stages.support(self.values(np.column_stack([theta, out])))
            if not bad.any():
                return out
            out[bad] = np.column_stack([prior.sample(rng, int(bad.sum())) for _, prior in self.independent])
        raise ConfigError(f"the priors of {', '.join(p.name for p, _ in self.independent)} leave almost no room "
                          f"inside the support of the stages: {int(bad.sum())} of {size} samples still outside")

    def log_prior(self, theta):
        """Log prior [n] of ``theta`` [n, ndim], inside the components' supports (fused path when it applies)."""
        fused = self._fused_path()
        return fused.log_prior(theta) if fused else self.general_log_prior(theta)

    def general_log_prior(self, theta):
        """Log prior [n] through each stage's own methods."""
        theta = np.atleast_2d(theta)
        lp = np.zeros(theta.shape[0])
        for j, prior in enumerate(self.priors):
            lp = lp + prior.logpdf(theta[:, j])
        vals = self.values(theta)
        if self._xz_may_exceed_one:
            lp = np.where(vals["X"] + vals["Z"] <= 1.0, lp, -np.inf)
        if self.feh is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                zx = np.log10(vals["Z"] / vals["X"]) - self.solar_log_zx
            lp = lp - 0.5 * ((zx - self.feh[0]) / self.feh[1]) ** 2
            lp = np.where(np.isfinite(lp), lp, -np.inf)
        if self._has_support:
            ok = np.isfinite(lp)
            if ok.any():  # the components' joint supports, asked only where the priors allow the point
                sub = vals if ok.all() else {kk: (v[ok] if np.ndim(v) else v) for kk, v in vals.items()}
                inside = np.zeros_like(ok)
                inside[ok] = self.stages.support(sub)
                lp = np.where(inside, lp, -np.inf)
        if self._has_density:
            ok = np.isfinite(lp)
            if ok.any():
                sub = vals if ok.all() else {kk: (v[ok] if np.ndim(v) else v) for kk, v in vals.items()}
                lp[ok] = lp[ok] + self.stages.log_prior_density(sub)
        return lp

    def predict(self, theta) -> dict:
        return self.stages.predict(self.values(theta))

    def log_likelihood(self, theta, predicted=None):
        vals = self.values(theta)
        pred = predicted if predicted is not None else self.stages.predict(vals)
        kw = {n: vals[n] for n in self._lik_names}
        ll = call_component(f"likelihood {self.stages.likelihood.name!r}", self.stages.likelihood.loglike, pred,
                            self.observed, **kw)
        # a relation that finds no star (NaN) or returns nonsense (<= 0) gives no likelihood
        physical = (pred["radius"] > 0) & (pred["luminosity"] > 0)
        return np.where(physical, ll, -np.inf)

    def __call__(self, theta):
        """Log-posterior [n] of ``theta`` [n, ndim]: the fused path when the stages allow it, else the general."""
        fused = self._fused_path()
        return fused(theta) if fused else self.general(theta)

    def _fused_path(self):
        """The fused log-posterior, built on first use, or False when these stages take the general path."""
        if self._fused is None:
            from radwalk.inference.fused import fused_log_prob

            self._fused = fused_log_prob(self) or False
        return self._fused

    @property
    def fused(self) -> bool:
        """Whether calls take the compiled path of :mod:`radwalk.inference.fused` (built if not yet)."""
        return bool(self._fused_path())

    def general(self, theta):
        """Log-posterior [n] through each stage's own methods (what the fused path must equal)."""
        theta = np.atleast_2d(theta)
        out = np.full(theta.shape[0], -np.inf)
        with np.errstate(all="ignore"):
            lp = self.general_log_prior(theta)
            ok = np.isfinite(lp)
            if ok.all():  # the common case in a converging chain: no fancy indexing
                out = lp + self.log_likelihood(theta)
            elif ok.any():
                out[ok] = lp[ok] + self.log_likelihood(theta[ok])
        out[np.isnan(out)] = -np.inf
        return out

    def sample_prior(self, rng: np.random.Generator, size: int):
        """Draws from the prior of the sampled parameters, [size, ndim], inside the components' supports.

        Each parameter is drawn from its own prior; draws outside the joint
        support (:meth:`radwalk.forward.stages.StageSet.support`) are thrown
        away and more are drawn, so the draws follow the product of the priors
        restricted to the support.  Where components add a joint prior term
        (:meth:`radwalk.forward.stages.StageSet.log_prior_density`, e.g. the
        age prior uniform up to each mass's lifetime), a pool
        :data:`_DENSITY_POOL` times larger is drawn and resampled with weights
        exp(term) (sampling-importance resampling, Rubin 1988): the draws then
        follow the whole prior, to that method's accuracy, and may repeat.
        """
        if not (self._has_density and self.priors):
            return self._draws_in_support(rng, size)
        pool = self._draws_in_support(rng, _DENSITY_POOL * size)
        with np.errstate(all="ignore"):
            logw = self.stages.log_prior_density(self.values(pool))
        w = np.exp(logw - np.max(logw))
        return pool[rng.choice(pool.shape[0], size=size, p=w / w.sum())]

    def _draws_in_support(self, rng: np.random.Generator, size: int):
        """Draws from the product of the declared priors restricted to the supports, [size, ndim]."""
        def draw(m):
            cols = [p.sample(rng, m) for p in self.priors]
            return np.column_stack(cols) if cols else np.zeros((m, 0))

        if not self._has_support or not self.priors:
            return draw(size)
        kept, have = [], 0
        for _ in range(_SUPPORT_ROUNDS):
            batch = draw(4 * size + 64)
            batch = batch[np.isfinite(self.log_prior(batch))]
            kept.append(batch)
            have += batch.shape[0]
            if have >= size:
                return np.concatenate(kept)[:size]
        raise ConfigError(f"the priors of {', '.join(self.names)} leave almost no room inside the support of the "
                          f"stages: {have} of {_SUPPORT_ROUNDS * (4 * size + 64)} draws inside; narrow the priors "
                          "to the models' range")

    def prior_widths(self):
        """A scale per parameter: the standard deviation of its prior (the whole prior, joint terms included)."""
        if self._widths is None:
            self._widths = self.sample_prior(np.random.default_rng(0), 4000).std(axis=0)
        return self._widths
