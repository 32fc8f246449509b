"""Posterior sampling of one star with emcee, run in chunks until converged.

The chain starts in a small ball around a posterior maximum found with
scipy.optimize (Nelder-Mead from several prior draws).  After each chunk the
integrated autocorrelation time tau is re-estimated; the run stops when the
chain is longer than ``tau_multiple`` times the largest tau and every tau
changed by less than ``tau_change`` since the previous chunk, or at
``max_steps`` (flagged not converged, with the reason).  Chains stay in
memory and are appended to an HDF5 file once per chunk
(:class:`radwalk.results.chain.ChainFile`), so a running fit can be inspected.

Cost of the checks.  tau is checked after every chunk, but not by analysing
the whole chain again (which made the checks' total cost grow with the square
of the chain's length): :class:`radwalk.inference.autocorr.RunningAutocorrTime`
keeps the autocorrelation sums up to the lags the estimate uses and extends
them by each new chunk, so a check costs about the same at step 20,000 as at
step 2,000 and the checks' total grows linearly with the chain.  It passes over
the whole chain only when the estimate's window outgrows the lags it holds
(then it at least doubles them): at most ``log2(max_steps / 256) + 1`` times in
a run, in practice once or twice while the walkers leave their starting ball.
The values are emcee's :func:`emcee.autocorr.integrated_time` to rounding
(benchmarks/convergence_checks.py times both ways).
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from radwalk.host.config import SamplerConfig
from radwalk.inference.autocorr import RunningAutocorrTime
from radwalk.inference.posterior import Posterior
from radwalk.results.chain import ChainFile

_BIG = 1e300


def _gaussian_kde(*args, **kwargs):
    from scipy.stats import gaussian_kde

    return gaussian_kde(*args, **kwargs)


def _import_emcee():
    """emcee, without the scipy.stats import its KDE move makes when emcee is imported.

    Nothing here uses that move, and importing scipy.stats costs about 0.35 s of
    CPU in every fresh process (a quarter of what a worker spends before its
    first sample; benchmarks/startup_cost.py).  scipy.stats is hidden while
    emcee is imported (a ``None`` entry in ``sys.modules`` makes that import
    fail, which emcee expects) and the move is then given a ``gaussian_kde``
    that imports scipy.stats when first called, so it still works for anyone
    who uses it.  If scipy.stats or emcee is already loaded, a plain import.
    """
    if "emcee" in sys.modules or "scipy.stats" in sys.modules:
        import emcee

        return emcee
    sys.modules["scipy.stats"] = None
    try:
        import emcee
        import emcee.moves.kde
    finally:
        if sys.modules.get("scipy.stats", 0) is None:
            del sys.modules["scipy.stats"]
    if emcee.moves.kde.gaussian_kde is None:
        emcee.moves.kde.gaussian_kde = _gaussian_kde
    return emcee


emcee = _import_emcee()


def MOVES():
    """Differential-evolution moves with some snooker updates.

    The posteriors here are narrow, curved ridges (mass against composition)
    with prior-dominated directions beside them; on such shapes these moves
    cut the largest autocorrelation time of a sun-like star from 161 to 60
    steps against emcee's default stretch move (same seed and chain rules).
    """
    return [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]


@dataclass
class Chain:
    """A finished (or stopped) emcee run."""

    names: list
    chain: np.ndarray  # [steps, walkers, ndim]
    log_prob: np.ndarray  # [steps, walkers]
    tau: np.ndarray  # [ndim], steps
    acceptance: float
    burn: int
    thin: int
    converged: bool
    reason: str
    map_theta: np.ndarray
    map_log_prob: float

    @property
    def steps(self) -> int:
        return self.chain.shape[0]

    def flat(self):
        """Thinned samples after burn-in ([N, ndim]) and their log-probabilities ([N])."""
        c = self.chain[self.burn :: self.thin]
        lp = self.log_prob[self.burn :: self.thin]
        return c.reshape(-1, c.shape[-1]), lp.reshape(-1)

    def effective_sample_size(self):
        kept = (self.steps - self.burn) * self.chain.shape[1]
        return kept / np.maximum(self.tau, 1.0)


def find_map(post: Posterior, rng: np.random.Generator, starts: int):
    """Posterior maximum from several starting points (best prior draws), Nelder-Mead."""
    cand = post.sample_prior(rng, 64 * starts)
    lp = post(cand)
    order = np.argsort(-lp)
    good = order[np.isfinite(lp[order])][:starts]
    if good.size == 0:
        return None, -np.inf
    scale = np.where(post.prior_widths() > 0, post.prior_widths(), 1.0)

    def neg(u):
        v = post((u * scale)[None, :])[0]
        return -v if np.isfinite(v) else _BIG

    best, best_lp = cand[good[0]], lp[good[0]]
    for i in good:
        res = minimize(neg, cand[i] / scale, method="Nelder-Mead",
                       options={"xatol": 1e-6, "fatol": 1e-8, "maxiter": 400 * post.ndim, "adaptive": True})
        if np.isfinite(res.fun) and -res.fun > best_lp:
            best, best_lp = res.x * scale, -res.fun
    return best, best_lp


def initial_ball(post: Posterior, centre, rng: np.random.Generator, walkers: int):
    """Walkers scattered tightly around ``centre`` inside the support."""
    scale = post.prior_widths()
    pts = np.empty((walkers, post.ndim))
    filled = 0
    for _ in range(200):
        trial = centre + 1e-3 * scale * rng.standard_normal((walkers, post.ndim))
        ok = np.isfinite(post(trial))
        take = trial[ok][: walkers - filled]
        pts[filled : filled + take.shape[0]] = take
        filled += take.shape[0]
        if filled == walkers:
            return pts
    raise RuntimeError("could not place walkers with a finite posterior around the maximum")


def run_chain(post: Posterior, cfg: SamplerConfig, seed: np.random.SeedSequence, chain_path=None,
              progress=None) -> Chain:
    """Optimises, then samples in chunks until converged or ``max_steps``.

    ``seed`` drives everything: the optimiser's starting draws, the walker ball
    and emcee's own generator, so one seed gives bit-identical samples.
    """
    opt_seed, emcee_seed = seed.spawn(2)
    rng = np.random.default_rng(opt_seed)
    centre, _ = find_map(post, rng, cfg.optimizer_starts)
    if centre is None:
        raise RuntimeError("no point inside the priors has a finite posterior")
    p0 = initial_ball(post, centre, rng, cfg.walkers)
    sampler = emcee.EnsembleSampler(cfg.walkers, post.ndim, post, vectorize=True, moves=MOVES())
    # emcee has no seed argument: seed its RandomState explicitly.
    sampler.random_state = np.random.RandomState(emcee_seed.generate_state(1)[0]).get_state()
    store = ChainFile(chain_path, post.names, cfg.walkers) if chain_path else None
    state, steps, old_tau = p0, 0, None
    converged, reason = False, ""
    tau = change = np.full(post.ndim, np.nan)
    autocorr = RunningAutocorrTime()
    while steps < cfg.max_steps:
        n = min(cfg.chunk, cfg.max_steps - steps)
        state = sampler.run_mcmc(state, n, progress=False)
        steps += n
        with np.errstate(invalid="ignore", divide="ignore"):  # a walker that did not move gives 0/0
            tau = autocorr.update(sampler.get_chain())
        tau = np.where(np.isfinite(tau), tau, float(steps))  # unknown: as long as the chain
        long_enough = steps > cfg.tau_multiple * np.max(tau)
        change = np.abs(tau - old_tau) / tau if old_tau is not None else np.full(post.ndim, np.nan)
        stable = old_tau is not None and bool(np.all(change < cfg.tau_change))
        if store:
            store.append(sampler.get_chain()[-n:], sampler.get_log_prob()[-n:], steps=steps,
                         tau=tau, converged=bool(long_enough and stable))
        if progress:
            progress(steps, tau)
        if long_enough and stable:
            converged = True
            break
        old_tau = tau
    chain = sampler.get_chain()
    log_prob = sampler.get_log_prob()
    tmax = float(np.max(tau))
    if not converged:
        if steps <= cfg.tau_multiple * tmax:
            reason = (f"stopped at max_steps = {cfg.max_steps}: chain of {steps} steps is shorter than "
                      f"{cfg.tau_multiple:g} x tau = {cfg.tau_multiple * tmax:.0f} (tau_max = {tmax:.1f})")
        else:
            # the change measured at the last check
            reason = (f"stopped at max_steps = {cfg.max_steps}: tau still changing by {100 * np.max(change):.1f} % "
                      f"(tolerance {100 * cfg.tau_change:g} %)")
    burn = min(int(math.ceil(3 * tmax)), steps // 2)
    thin = max(1, int(0.5 * np.min(tau)))
    i, j = np.unravel_index(np.argmax(log_prob), log_prob.shape)
    return Chain(
        names=list(post.names), chain=chain, log_prob=log_prob, tau=tau,
        acceptance=float(np.mean(sampler.acceptance_fraction)), burn=burn, thin=thin,
        converged=converged, reason=reason, map_theta=chain[i, j].copy(), map_log_prob=float(log_prob[i, j]),
    )
