"""Integrated autocorrelation time of a growing chain, updated chunk by chunk.

The estimate is the one of :func:`emcee.autocorr.integrated_time` (Sokal's
self-consistent window: the normalised autocorrelation function of each walker,
averaged over walkers, summed up to the first lag ``M`` with ``M >= c tau(M)``;
A. D. Sokal, "Monte Carlo methods in statistical mechanics: foundations and
new algorithms", in Functional Integration, NATO ASI Series B 361, Springer
1997, section 3; Goodman & Weare 2010 for the ensemble).  emcee recomputes
the whole autocorrelation function by FFT on each call, so calling it after
every chunk of a chain of ``N`` steps costs ``O(N^2 log N)`` in all.  Only the lags up to the window enter the estimate,
and the window stops growing once the chain is a few ``c tau`` long, so here
the lag sums

    P_k = sum_t y_t y_(t+k),  k < L,   y = x - x_0 (each walker's first sample)

are kept and extended by each new chunk (an FFT over the chunk and the ``L``
steps before it); the mean is removed afterwards from running sums,

    C_k = P_k - mu (H_k + T_k) + (N - k) mu^2,

with ``H_k``, ``T_k`` the sums of ``y`` without its last / first ``k`` steps.
Subtracting the first sample first keeps the cancellation harmless.  A check
then reads the new steps and the ``L - 1`` steps before them, not the chain.

When the window lies beyond the ``L`` lags held (early in a run, while the
walkers are still spreading out of their starting ball), one full pass over the
chain gives the exact answer and ``L`` is raised to twice the window found
(a power of two), so ``L`` at least doubles at each full pass: a run of ``N``
steps makes at most ``log2(N / L0) + 1`` full passes.  A chain whose window
keeps growing with its length (``c tau`` comparable to ``N``: it cannot meet
the ``N > 50 tau`` rule then) ends with ``L`` of the order of ``N`` and costs
about as much per check as a full pass.

The values equal emcee's to rounding (the lag sums are summed in another
order; checked to 1e-10 in tests/inference/test_autocorr.py), including a
walker that never moved (0/0: ``nan`` for its parameter, as in emcee).
"""

from __future__ import annotations

import numpy as np


def _next_pow_two(n: int) -> int:
    return 1 << max(0, int(n - 1).bit_length())


class RunningAutocorrTime:
    """Integrated autocorrelation time of a chain that grows at its end.

    Parameters
    ----------
    c : float
        Window factor (emcee's ``c``): the window is the first lag ``M`` with ``M >= c tau(M)``.
    lags : int
        Lags held at first (raised when the window lies beyond them).

    Attributes
    ----------
    full_passes : int
        Passes over the whole chain made so far (the start and each raise of the lags held).
    steps_read : int
        Chain steps read so far, summed over all updates (each step counts once per read).
    """

    def __init__(self, c: float = 5.0, lags: int = 256):
        self.c = float(c)
        self.lags = _next_pow_two(int(lags))
        self.full_passes = 0
        self.steps_read = 0
        self._n = 0  # steps already in the lag sums
        self._ref = None  # [walkers, ndim] each walker's first sample
        self._p = None  # [lags, walkers, ndim] lag sums of y
        self._sum = None  # [walkers, ndim] sum of y
        self._head = None  # [<= lags, walkers, ndim] y of the first steps
        self._recent = None  # [>= lags - 1, walkers, ndim] y of the last steps

    def update(self, chain) -> np.ndarray:
        """Adds the steps not seen yet and returns tau.

        Parameters
        ----------
        chain : numpy.ndarray
            The whole chain so far, [steps, walkers, ndim]; the steps seen before must be unchanged.

        Returns
        -------
        numpy.ndarray
            tau [ndim], steps; ``nan`` for a parameter some walker never moved in.
        """
        n = chain.shape[0]
        if n < self._n or n == 0:
            raise ValueError(f"the chain has {n} steps; it had {self._n} at the last update")
        if self._ref is None:
            self._ref = np.array(chain[0], dtype=float)
            self._full_pass(chain)
        elif n > self._n:
            self._extend(chain)
        tau, window, found = self._estimate(chain, min(self.lags, n))
        if not found:
            # The window lies beyond the lags held: every lag once, then hold twice the window.
            self._full_pass(chain, every_lag=True)
            tau, window, _ = self._estimate(chain, n)
            self.lags = max(2 * self.lags, _next_pow_two(2 * int(np.max(window)) + 2))
            self._resize()
        return tau

    # -- lag sums -------------------------------------------------------------

    def _full_pass(self, chain, every_lag=False):
        """Lag sums of the whole chain, for the lags held (or for every lag)."""
        n = chain.shape[0]
        lags = n if every_lag else min(self.lags, n)
        self.full_passes += 1
        self.steps_read += n
        y = np.asarray(chain, dtype=float) - self._ref
        nfft = _next_pow_two(n + lags)
        f = np.fft.rfft(y, n=nfft, axis=0)
        self._p = np.fft.irfft(f * np.conj(f), n=nfft, axis=0)[:lags]
        self._sum = y.sum(axis=0)
        self._n = n
        self._head, self._recent = y[: max(lags, self.lags)].copy(), y[-max(lags, self.lags):].copy()
        if not every_lag:
            self._resize()

    def _resize(self):
        """Holds exactly ``lags`` lag sums (lags past the chain's length are empty sums: 0)."""
        if self._p.shape[0] >= self.lags:
            self._p = self._p[: self.lags].copy()
        else:
            pad = np.zeros((self.lags - self._p.shape[0],) + self._p.shape[1:])
            self._p = np.concatenate([self._p, pad])

    def _extend(self, chain):
        """Adds the new steps' products with themselves and the ``lags - 1`` steps before them."""
        n, old, lags = chain.shape[0], self._n, self.lags
        start = max(0, old - (lags - 1))
        a = np.asarray(chain[start:n], dtype=float) - self._ref
        self.steps_read += n - start
        b = a.copy()
        b[: old - start] = 0.0  # only products with a new step are new
        nfft = _next_pow_two(a.shape[0] + lags)
        fa = np.fft.rfft(a, n=nfft, axis=0)
        fb = np.fft.rfft(b, n=nfft, axis=0)
        # sum_j b_j a_(j-k): every product of a new step with the one k steps before it
        self._p += np.fft.irfft(fb * np.conj(fa), n=nfft, axis=0)[:lags]
        self._sum += a[old - start :].sum(axis=0)
        self._n = n
        self._recent = a
        if self._head.shape[0] < min(lags, n):  # start == 0 then: a holds the first steps
            self._head = a[:lags].copy()

    # -- the estimate -----------------------------------------------------------

    def _estimate(self, chain, k_max):
        """tau [ndim], window [ndim] and whether the window was found within the first ``k_max`` lags."""
        n = chain.shape[0]
        head = self._head[:k_max]  # the first and last steps were kept when they were read
        tail = self._recent[self._recent.shape[0] - (k_max - 1) :] if k_max > 1 else head[:0]
        k = np.arange(k_max)
        zero = np.zeros((1,) + head.shape[1:])
        first = np.concatenate([zero, np.cumsum(head, axis=0)[:-1]])  # sum of y_t for t < k
        last = np.concatenate([zero, np.cumsum(tail[::-1], axis=0)])[:k_max]  # sum of y_t for t >= n - k
        mu = self._sum / n
        c = (self._p[:k_max] - mu * ((self._sum - last) + (self._sum - first))
             + (n - k)[:, None, None] * mu * mu)
        with np.errstate(invalid="ignore", divide="ignore"):  # a walker that never moved: 0/0 as in emcee
            f = np.mean(c / c[0], axis=1)  # [k_max, ndim]
        taus = 2.0 * np.cumsum(f, axis=0) - 1.0
        inside = k[:, None] < self.c * taus
        # emcee's auto_window: the first lag outside.  Over every lag of a chain one always is
        # (the mean-removed sums add up to zero, so the last tau is 0); over fewer, maybe not.
        window = np.argmin(inside, axis=0)
        found = k_max == n or not np.any(np.all(inside, axis=0))
        return taus[window, np.arange(taus.shape[1])], window, found
