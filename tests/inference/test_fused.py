"""The fused log-posterior of the track-grid stages equals the general, stage-by-stage path.

The reference is radwalk's own general path (:meth:`radwalk.inference.posterior.Posterior.general`), which the
other tests check against published values; the fused loop must reproduce it (and the log prior alone) to
1e-10 (relative) at random points, and give -inf at exactly the same points (outside a prior, past the end of
the main sequence, off the grid).  Points are drawn from the priors inside the support, from each prior alone
(many outside the support) and beyond the priors, for an invented star.
"""

from __future__ import annotations

import numpy as np
import pytest

from radwalk.host.config import RunConfig
from radwalk.host.params import Prior
from radwalk.inference.fit import stages_for
from radwalk.inference.fused import why_not_fused
from radwalk.inference.posterior import Posterior
from radwalk.inference.star import Star

RTOL = 1e-10  # the bound: both paths do the same arithmetic in another order, equal to rounding


def _star(**missing):
    values = dict(radius=1.31, radius_err=0.02, luminosity=2.9, luminosity_err=0.1, teff=6350.0, teff_err=60.0)
    for key in missing:
        values[key] = float("nan")
        values[f"{key}_err"] = float("nan")
    return Star.from_user_units("invented", **values)


def _points(post, rng, n=3000):
    """Prior draws inside the support, raw draws from each prior (many outside it) and a few beyond the priors."""
    inside = post.sample_prior(rng, n)
    raw = np.column_stack([p.sample(rng, n) for p in post.priors])
    wild = raw.copy()
    wild[: n // 10] *= rng.uniform(0.0, 3.0, size=(n // 10, post.ndim))  # past prior bounds and grid edges
    return np.vstack([inside, raw, wild])


def _assert_same(post, theta):
    assert post.fused, why_not_fused(post)
    general, fused = post.general(theta), post(theta)
    assert not np.isnan(fused).any()
    same_inf = np.isneginf(general) == np.isneginf(fused)
    assert same_inf.all(), theta[~same_inf][:5]
    ok = np.isfinite(general)
    assert ok.sum() > theta.shape[0] // 4  # enough finite points to mean something
    np.testing.assert_allclose(fused[ok], general[ok], rtol=RTOL, atol=0.0)
    # the prior alone (prior draws and the optimizer's starts use it)
    general, fused = post.general_log_prior(theta), post.log_prior(theta)
    assert (np.isneginf(general) == np.isneginf(fused)).all()
    ok = np.isfinite(general)
    np.testing.assert_allclose(fused[ok], general[ok], rtol=RTOL, atol=1e-12)


@pytest.mark.parametrize("case", ["default", "feh", "no-luminosity", "teff-only", "floors"])
def test_fused_equals_general_on_the_shipped_grid(case, rng):
    settings, feh, missing = {}, None, {}
    if case == "feh":
        feh = (-0.2, 0.08)
    if case == "no-luminosity":
        missing = {"luminosity": True}
    if case == "teff-only":
        missing = {"luminosity": True, "radius": True}
    if case == "floors":
        settings = {"floor_radius": 0.0, "floor_luminosity": 0.2, "floor_teff": 0.05}
    cfg = RunConfig(settings=settings)
    star = _star(**missing)
    post = Posterior(stages_for(cfg), star.observations(), cfg, feh=feh)
    _assert_same(post, _points(post, rng))


@pytest.mark.parametrize("kind", ["uniform", "log-uniform", "normal", "truncated-normal", "salpeter", "kroupa"])
def test_fused_equals_general_for_every_prior_kind(kind, rng):
    mass = {"uniform": Prior("uniform", 0.7, 3.0), "log-uniform": Prior("log-uniform", 0.7, 3.0),
            "normal": Prior("normal", 0.2, 5.0, 1.3, 0.4),
            "truncated-normal": Prior("truncated-normal", 0.8, 2.0, 1.3, 0.3),
            "salpeter": Prior("salpeter", 0.6, 8.0), "kroupa": Prior("kroupa", 0.6, 8.0)}[kind]
    cfg = RunConfig(priors={"mass": mass, "age": Prior("truncated-normal", 0.0, 13.8, 2.0, 1.5)})
    post = Posterior(stages_for(cfg), _star().observations(), cfg, feh=(0.05, 0.1))
    _assert_same(post, _points(post, rng))


def test_fused_equals_general_with_a_fixed_age_and_a_small_grid(small_track_grid, rng):
    """Age held fixed (not sampled) and a grid of 5 masses x 2 Z, whose Z stencil has two points."""
    cfg = RunConfig(settings={"grid": small_track_grid, "age": 1.0},
                    priors={"mass": Prior("uniform", 0.8, 2.0), "Z": Prior("log-uniform", 0.01, 0.02)})
    post = Posterior(stages_for(cfg), _star().observations(), cfg)
    assert post.names == ["mass", "Z"]
    _assert_same(post, _points(post, rng))


def test_other_stages_keep_the_general_path():
    """A textbook relation or a Student-t likelihood is not fused: the posterior says why and calls each stage."""
    for stages, word in (({"profile": "polytrope", "relation": "homology"}, "relation"),
                         ({"likelihood": "student-t"}, "likelihood")):
        cfg = RunConfig(stages=stages)
        post = Posterior(stages_for(cfg), _star().observations(), cfg)
        assert word in why_not_fused(post)
        assert not post.fused
        theta = post.sample_prior(np.random.default_rng(0), 50)
        np.testing.assert_array_equal(post(theta), post.general(theta))
        np.testing.assert_array_equal(post.log_prior(theta), post.general_log_prior(theta))


def test_only_the_declaring_class_is_fused():
    """A subclass of a built-in component may change its arithmetic: it takes the general path unless it says so."""
    from radwalk.inference.fused import declares
    from radwalk.plugins.track_grid import TrackGridRelation

    class Shifted(TrackGridRelation):
        name = "shifted-grid"

        def predict(self, M, X, Z, opacity, age=0.0):
            R, L = super().predict(M, X, Z, opacity, age=age)
            return 1.1 * R, L

    assert declares(TrackGridRelation(), "track-grid")
    assert not declares(Shifted(), "track-grid")
