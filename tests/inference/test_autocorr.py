"""The running autocorrelation time: emcee's values, at a cost linear in the chain's length (issue 13)."""

import emcee
import h5py
import numpy as np
import pytest
from scipy.signal import lfilter

from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.autocorr import RunningAutocorrTime
from radwalk.inference.fit import stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import run_chain
from radwalk.inference.star import Star, seed_for

CHUNK = 200


def ar1_chain(steps, walkers, rho, rng, offset):
    """AR(1) series per walker and parameter (tau = (1 + rho) / (1 - rho)), leaving a small starting ball."""
    rho = np.asarray(rho, dtype=float)
    x = np.empty((steps, walkers, rho.size))
    for d, r in enumerate(rho):
        e = rng.standard_normal((steps, walkers)) * np.sqrt(1 - r * r)
        x[:, :, d] = lfilter([1.0], [1.0, -r], e, axis=0)
    # walkers start in a ball of 1e-3 of the width and spread out over the first steps, as in run_chain
    x[:300] *= np.linspace(1e-3, 1.0, 300)[:, None, None]
    return x + np.asarray(offset)


def emcee_tau(chain):
    with np.errstate(invalid="ignore", divide="ignore"):
        return emcee.autocorr.integrated_time(chain, tol=0, quiet=True)


def test_equals_emcee_after_every_chunk_including_a_walker_that_never_moved(rng):
    # Reference: emcee.autocorr.integrated_time on the whole chain (what the sampler used to call each chunk).
    # Offsets as large as the parameters' values (age in Gyr, a log) test the removal of the mean.
    x = ar1_chain(4000, 16, [0.9, 0.97, 0.99, 0.5], rng, offset=[1.0, 9.6, 0.0, -3.0])
    x[:, 3, 2] = 0.25  # a walker stuck for the whole run: 0/0 for that parameter
    est = RunningAutocorrTime()
    for n in range(CHUNK, x.shape[0] + 1, CHUNK):
        got, want = est.update(x[:n]), emcee_tau(x[:n])
        assert np.array_equal(np.isnan(got), np.isnan(want)), n
        ok = np.isfinite(want)
        np.testing.assert_allclose(got[ok], want[ok], rtol=1e-10, err_msg=f"after {n} steps")
    assert np.isnan(got[2]) and np.all(np.isfinite(got[[0, 1, 3]]))


def test_equals_emcee_when_the_window_outgrows_the_lags_held_and_with_uneven_chunks(rng):
    # tau ~ 400: the window (5 tau) needs far more than the 256 lags held at first.
    x = ar1_chain(5000, 8, [0.995, 0.8], rng, offset=[0.0, 1.0])
    est = RunningAutocorrTime(lags=256)
    for n in (37, 38, 500, 1234, 1235, 3000, 5000):
        np.testing.assert_allclose(est.update(x[:n]), emcee_tau(x[:n]), rtol=1e-10, err_msg=f"after {n} steps")
    assert est.lags > 256


def test_a_shorter_chain_than_last_time_is_refused(rng):
    x = ar1_chain(400, 8, [0.5], rng, offset=[0.0])
    est = RunningAutocorrTime()
    est.update(x[:400])
    with pytest.raises(ValueError, match="it had 400"):
        est.update(x[:200])


def checks_up_to(x, steps):
    est = RunningAutocorrTime()
    for n in range(CHUNK, steps + 1, CHUNK):
        est.update(x[:n])
    return est


def test_whole_chain_passes_grow_logarithmically_and_steps_read_linearly(rng):
    # Counting, not timing.  Re-analysing the whole chain after every chunk (the sampler's old checks) reads
    # sum_i i * CHUNK steps: 16 times as many at 20,000 steps as at 5,000.
    x = ar1_chain(20000, 32, [0.97, 0.985, 0.95], rng, offset=[1.0, 0.02, 4.5])  # tau ~ 66, 132, 39
    short, long = checks_up_to(x, 5000), checks_up_to(x, 20000)
    assert long.full_passes <= np.log2(20000 / 256) + 1
    assert long.full_passes == short.full_passes  # the window stopped growing before 5,000 steps
    whole_chain_reads = lambda steps: sum(range(CHUNK, steps + 1, CHUNK))  # noqa: E731
    assert whole_chain_reads(20000) / whole_chain_reads(5000) > 15
    # linear: once the lags held stop growing, each check reads its chunk and the lags before it, whatever N
    assert long.steps_read - short.steps_read <= (20000 - 5000) // CHUNK * (CHUNK + long.lags - 1)
    assert long.steps_read / short.steps_read < 4.5
    assert long.steps_read < 0.2 * whole_chain_reads(20000)


def test_run_chain_reports_emcee_tau_and_stores_every_step(tmp_path):
    cfg = RunConfig(settings={"band_stars": 2},
                    sampler=SamplerConfig(walkers=16, chunk=150, max_steps=700, optimizer_starts=2))
    star = Star.from_user_units("s", 1.02, 0.03, 1.05, 0.05, 5800, 80)
    post = Posterior(stages_for(cfg), star.observations(), cfg)
    chain = run_chain(post, cfg.sampler, seed_for(3, star.id), chain_path=tmp_path / "chain.h5")
    assert chain.steps == 700 and not chain.converged  # last chunk short: 4 x 150 + 100
    np.testing.assert_allclose(chain.tau, emcee_tau(chain.chain), rtol=1e-10)
    with h5py.File(tmp_path / "chain.h5", "r") as f:
        np.testing.assert_array_equal(f["chain"][:], chain.chain)
        np.testing.assert_array_equal(f["log_prob"][:], chain.log_prob)
        assert f.attrs["steps"] == 700
