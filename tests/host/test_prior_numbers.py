"""Prior numbers are validated at construction and truncated priors are sampled without unbounded loops."""

import math

import numpy as np
import pytest
from scipy import stats

from radwalk.errors import ConfigError
from radwalk.host.config import from_dict
from radwalk.host.params import Prior


@pytest.mark.parametrize("kind", ["truncated-normal", "normal"])
@pytest.mark.parametrize("mean, sigma", [
    (50.0, 1.0),           # mean 49 sigma above the upper bound: the bounds hold ~0 of the normal's mass
    (-30.0, 0.5),          # far below
    (float("nan"), 1.0),   # NaN mean
    (0.5, float("inf")),   # infinite sigma
    (float("inf"), 1.0),   # infinite mean
])
def test_prior_with_no_mass_inside_its_bounds_is_refused(kind, mean, sigma):
    # Before: these were accepted and sample() looped forever in rejection sampling.
    with pytest.raises(ConfigError, match="prior"):
        Prior(kind, 0.0, 1.0, mean, sigma)


def test_untruncated_normal_needs_finite_numbers():
    with pytest.raises(ConfigError):
        Prior("normal", -math.inf, math.inf, math.nan, 1.0)
    with pytest.raises(ConfigError):
        Prior("normal", -math.inf, math.inf, 0.0, math.inf)
    with pytest.raises(ConfigError):
        Prior("uniform", math.nan, 1.0)


def test_config_with_far_truncated_normal_is_refused_with_its_key():
    data = {"priors": {"mass": {"kind": "truncated-normal", "lower": 0.5, "upper": 2.0, "mean": 40.0, "sigma": 1.0}}}
    with pytest.raises(ConfigError, match=r"\[priors.mass\]"):
        from_dict(data)


@pytest.mark.parametrize("lower, upper, mean, sigma", [
    (0.0, 1.0, 0.5, 0.2),      # mean inside
    (3.0, 4.0, 0.0, 1.0),      # bounds 3-4 sigma above the mean: 1.3e-3 of the mass
    (-6.0, -4.5, 0.0, 1.0),    # 4.5-6 sigma below: 3.4e-6 of the mass
])
def test_truncated_normal_draws_match_scipy(lower, upper, mean, sigma, rng):
    # Reference: scipy.stats.truncnorm (the same distribution from a reference library).
    prior = Prior("truncated-normal", lower, upper, mean, sigma)
    x = prior.sample(rng, 20000)
    assert x.shape == (20000,)
    assert np.all((x >= lower) & (x <= upper))
    ref = stats.truncnorm((lower - mean) / sigma, (upper - mean) / sigma, loc=mean, scale=sigma)
    # Kolmogorov-Smirnov against the exact distribution; p > 1e-3 fails by chance once in 1000 seeds
    assert stats.kstest(x, ref.cdf).pvalue > 1e-3


@pytest.mark.parametrize("kind, lower, upper", [("salpeter", 0.1, 100.0), ("kroupa", 0.01, 50.0),
                                                ("kroupa", 0.6, 2.0)])
def test_imf_draws_follow_their_density(kind, lower, upper, rng):
    # Reference: the normalised density exp(logpdf) integrated numerically (scipy.integrate.quad).
    from scipy.integrate import quad

    prior = Prior(kind, lower, upper)
    x = prior.sample(rng, 20000)
    assert np.all((x >= lower) & (x <= upper))
    breaks = [b for b in (0.08, 0.5) if lower < b < upper]
    norm = quad(lambda m: math.exp(prior.logpdf(m)), lower, upper, points=breaks, limit=200)[0]

    def cdf(v):
        return np.array([quad(lambda m: math.exp(prior.logpdf(m)), lower, t, points=[b for b in breaks if b < t],
                              limit=200)[0] for t in np.atleast_1d(v)]) / norm

    grid = np.geomspace(lower, upper, 60)
    emp = np.searchsorted(np.sort(x), grid, side="right") / x.size
    # Dvoretzky-Kiefer-Wolfowitz: |F_n - F| < 0.0136 with probability 1 - 1e-3 at n = 20000
    assert np.max(np.abs(emp - cdf(grid))) < 0.0136
