"""Fits with the track-grid relation: an invented star's mass and age recovered; stars off the main sequence refused.

All on the small session grid of tests/conftest.py (0.8-2 M_sun x Z 0.01-0.02); the priors on mass and Z are
set to the grid's range, as a run with a restricted grid would set them.
"""

from __future__ import annotations

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.errors import ConfigError, ModelError
from radwalk.forward.model_grid import TrackGrid
from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.host.params import Prior
from radwalk.inference.derived import band_rows, band_structures, check_reachable, derive
from radwalk.inference.fit import fit_one, stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import run_chain
from radwalk.inference.star import Star, seed_for
from radwalk.plugins.track_grid import GYR, hydrogen_of

TRUTH = {"mass": 1.3, "Z": 0.014, "phase": 0.6}  # invented star: 1.3 M_sun, 60 % through its main sequence
ERRORS = {"radius": 0.02, "luminosity": 0.04, "teff": 0.01}  # fractional, as for a well-measured field star


def _config(grid_file, profile="polytrope", **sampler):
    return RunConfig(stages={"relation": "track-grid", "profile": profile}, settings={"grid": grid_file},
                     priors={"mass": Prior("uniform", 0.8, 2.0), "Z": Prior("log-uniform", 0.01, 0.02)},
                     sampler=SamplerConfig(walkers=24, chunk=300, max_steps=3000, derived_samples=100,
                                           optimizer_starts=3, **sampler))


@pytest.fixture(scope="module")
def truth(small_track_grid):
    stages = stages_for(_config(small_track_grid))
    grid = stages.relation.grid(stages.bound_opacity(stages.defaults()))
    life = float(grid.lifetime_at(np.array([TRUTH["mass"] * k.M_SUN]), np.array([TRUTH["Z"]]))[0]) / GYR
    return {"mass": TRUTH["mass"], "Z": TRUTH["Z"], "age": TRUTH["phase"] * life}


def _observed(stages, values, rng=None, name="invented"):
    v = stages.defaults()
    v.update({key: np.array([val]) for key, val in values.items()})
    v.setdefault("X", np.array([0.7]))
    pred = stages.predict(v)
    obs = {}
    for key, unit in (("radius", k.R_SUN), ("luminosity", k.L_SUN), ("teff", 1.0)):
        value = pred[key][0] / unit
        obs[f"{key}_err"] = ERRORS[key] * value
        obs[key] = value + (0.0 if rng is None else obs[f"{key}_err"] * rng.standard_normal())
    return Star.from_user_units(name, **obs)


def test_fit_recovers_mass_and_age_of_an_invented_star(small_track_grid, truth, rng):
    cfg = _config(small_track_grid)
    stages = stages_for(cfg)
    star = _observed(stages, truth, rng)
    post = Posterior(stages, star.observations(), cfg)
    assert "age" in post.names
    chain = run_chain(post, cfg.sampler, seed_for(5, star.id))
    flat, _ = chain.flat()
    for name in ("mass", "age"):
        lo, hi = np.percentile(flat[:, post.names.index(name)], [2.5, 97.5])
        assert lo <= truth[name] <= hi, (name, truth[name], lo, hi)
    # every sample is a main-sequence star: its age within its own lifetime
    v = post.values(flat)
    assert post.stages.support(v).all()
    check_reachable(post, chain.map_theta)  # a main-sequence star inside the grid is never refused


def _refusal(grid_file, R, L, T):
    cfg = _config(grid_file)
    stages = stages_for(cfg)
    star = Star.from_user_units("invented", R, 0.02 * R, L, 0.04 * L, T, 0.01 * T)
    post = Posterior(stages, star.observations(), cfg)
    theta = post.sample_prior(np.random.default_rng(3), 1)[0]  # any star of the model: all are far
    with pytest.raises(ModelError) as err:
        check_reachable(post, theta)
    return str(err.value)


def test_a_star_beyond_the_end_of_the_main_sequence_is_refused_in_those_words(small_track_grid):
    # An invented subgiant: 5 R_sun, 12 L_sun (T_eff = 5772 K (12 / 25)^(1/4) = 4800 K, IAU 2015 nominal Sun).
    msg = _refusal(small_track_grid, 5.0, 12.0, 5772.0 * (12.0 / 25.0) ** 0.25)
    assert msg.startswith("beyond the end of the main sequence for every allowed composition: "), msg


def test_a_star_below_the_zero_age_main_sequence_is_refused_in_those_words(small_track_grid):
    # An invented compact star: 0.55 R_sun at 2 L_sun (T_eff = 5772 K (2 / 0.55^2)^(1/4) = 9380 K).
    msg = _refusal(small_track_grid, 0.55, 2.0, 5772.0 * (2.0 / 0.55**2) ** 0.25)
    assert msg.startswith("below the zero-age main sequence for every allowed composition: "), msg


def _six_samples(post, truth):
    """Six posterior-like samples around the truth, 1.25-1.35 M_sun at the true Z and age, [6, ndim]."""
    theta = np.tile([truth[n] if n in truth else 0.7 for n in post.names], (6, 1))
    theta[:, post.names.index("mass")] = np.linspace(1.25, 1.35, 6)
    return theta


def test_derived_quantities_and_bands_come_from_the_grid(small_track_grid, truth):
    cfg = _config(small_track_grid, profile="track-grid")
    stages = stages_for(cfg)
    star = _observed(stages, truth)
    post = Posterior(stages, star.observations(), cfg)
    theta = _six_samples(post, truth)
    derived, bands, r_rel, notes, ok = derive(post, theta)
    assert ok.all()
    for name in ("central_hydrogen", "main_sequence_lifetime", "diffusion_time", "kelvin_helmholtz_time",
                 "convective_core_mass_fraction"):
        assert derived[name].shape == (6,) and np.isfinite(derived[name]).all(), name
    # the grid's values, sample by sample (a 1.25-1.35 M_sun star at a fixed age: more massive, less X_c left)
    assert np.all(np.diff(derived["central_hydrogen"]) < 0)
    # the mean molecular weight is the grid's composition's, not the sampled X's (0.7 here)
    grid = stages.relation.grid(stages.bound_opacity(stages.defaults()))
    X0 = float(hydrogen_of(grid, truth["Z"]))
    Y0 = 1.0 - X0 - truth["Z"]
    # fully ionised gas: 1 / mu = 2 X + 3 Y / 4 + Z / 2 (Kippenhahn, Weigert & Weiss 2012, sect. 4.2)
    assert derived["mu"] == pytest.approx(np.full(6, 1.0 / (2.0 * X0 + 0.75 * Y0 + 0.5 * truth["Z"])))
    # The bands are the grid's stored profiles of all six samples: their median central density lies between
    # the samples' own (the grid's scalars, cubic in log M, against the profiles' linear interpolation).
    assert bands["T"].shape == (5, r_rel.size) and r_rel[0] == 0.0 and r_rel[-1] == 1.0
    rho_c = np.sort(derived["central_density"])
    assert rho_c[0] * 0.98 < bands["rho"][2, 0] < rho_c[-1] * 1.02
    # Without structures (what a fit does before its figures) nothing changes: no structure is solved either way.
    quick, quick_bands, quick_r, _, quick_ok = derive(post, theta, structures=False)
    assert quick_ok.all()
    np.testing.assert_array_equal(quick_r, r_rel)
    for name, values in derived.items():
        np.testing.assert_array_equal(quick[name], values, err_msg=name)
    for name, band in bands.items():
        np.testing.assert_array_equal(quick_bands[name], band, err_msg=name)


def test_a_grid_without_profiles_solves_few_band_stars(small_track_grid, truth, tmp_path):
    # A grid file of version 1 carries no profiles: the bands' structures are then solved for band_samples of
    # the samples, and only when asked (the figures).
    full = TrackGrid.load(small_track_grid)
    header = {key: v for key, v in full.header.items() if key != "profiles"} | {"version": 1}
    bare = TrackGrid(full.log_mass, full.log_z, full.phase, full.lifetime, full.table, header, X0=full.X0)
    path = bare.save(tmp_path / "no-profiles.npz")
    cfg = _config(str(path), profile="track-grid")
    stages = stages_for(cfg)
    post = Posterior(stages, _observed(stages, truth).observations(), cfg)
    theta = _six_samples(post, truth)
    stages.profile.band_samples = 2  # this configured copy only
    assert band_rows(6, stages.profile).tolist() == [0, 5]
    derived, bands, r_rel, notes, ok = derive(post, theta)
    assert ok.all() and bands["T"].shape[1] == r_rel.size
    quick, none_bands, none_r, _, quick_ok = derive(post, theta, structures=False)
    assert none_bands is None and none_r is None and quick_ok.all()
    later_r, later_bands, _ = band_structures(post, theta)
    np.testing.assert_array_equal(later_r, r_rel)
    for name, band in bands.items():
        np.testing.assert_array_equal(later_bands[name], band, err_msg=name)


@pytest.mark.slow
def test_whole_fit_with_the_track_grid_stages(small_track_grid, truth, rng):
    # fit_one end to end with both track-grid stages
    cfg = _config(small_track_grid, profile="track-grid")
    star = _observed(stages_for(cfg), truth, rng)
    summary, products = fit_one(star, cfg, seed_for(9, star.id))
    assert summary["stages"]["relation"] == "track-grid"
    assert "main_sequence_lifetime" in summary["derived"] and "age" in summary["parameters"]
    lo, hi = np.percentile(products.samples[:, products.param_names.index("mass")], [2.5, 97.5])
    assert lo <= truth["mass"] <= hi


def test_x_follows_z_by_the_grid_rule(small_track_grid):
    cfg = _config(small_track_grid)
    stages = stages_for(cfg)
    post = Posterior(stages, Star.from_user_units("x", 1.2, 0.03, 2.0, 0.1).observations(), cfg,
                     feh=(0.0, 0.05))
    assert "X" not in post.names and "X" not in post.fixed
    theta = np.zeros((2, post.ndim))
    for j, name in enumerate(post.names):
        theta[:, j] = {"mass": [1.2, 1.5], "Z": [0.012, 0.019], "age": [1.0, 0.5]}[name]
    vals = post.values(theta)
    grid = stages.relation.grid(stages.bound_opacity(stages.defaults()))
    np.testing.assert_allclose(vals["X"], hydrogen_of(grid, np.array([0.012, 0.019])), rtol=1e-12)
    with pytest.raises(ConfigError, match="composition rule"):
        Posterior(stages, star_obs(), RunConfig(stages=cfg.stages, settings={**cfg.settings, "X": 0.7}))


def star_obs():
    return Star.from_user_units("x", 1.2, 0.03, 2.0, 0.1).observations()


def test_age_prior_is_uniform_up_to_each_mass_lifetime(small_track_grid):
    """Every mass gets the same total prior weight: the density in age is 1 / min(t_MS, 13.8 Gyr)."""
    cfg = _config(small_track_grid)
    stages = stages_for(cfg)
    post = Posterior(stages, star_obs(), cfg)
    grid = stages.relation.grid(stages.bound_opacity(stages.defaults()))
    for mass in (1.0, 1.9):
        life = float(grid.lifetime_at(np.array([mass * k.M_SUN]), np.array([0.014]))[0]) / GYR
        ages = np.linspace(0.0, 14.0, 4001)
        theta = np.zeros((ages.size, post.ndim))
        for j, name in enumerate(post.names):
            theta[:, j] = {"mass": mass, "Z": 0.014, "age": ages}[name]
        p = np.exp(post.log_prior(theta) - post.log_prior(theta[:1])[0])
        weight = np.trapezoid(p, ages) * np.exp(post.log_prior(theta[:1])[0])
        if mass == 1.0:
            first = weight
        else:
            # the mass prior is uniform here: equal weights up to the step of the age integration
            assert weight == pytest.approx(first, rel=2 * 14.0 / 4000 / min(life, 13.8))
        assert np.all(p[ages > min(life, 13.8) + 1e-9] == 0)
