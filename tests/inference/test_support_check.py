"""The host's support check: a component's joint support bounds the posterior and the prior draws.

An invented plugin declares a relation with a parameter whose allowed range depends on the mass (like an age
capped by the main-sequence lifetime), and a profile with one of its own.
"""

from __future__ import annotations

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.errors import ModelError
from radwalk.forward.stages import StageSet
from radwalk.host.components import Observations
from radwalk.host.config import RunConfig
from radwalk.host.contracts import check_component
from radwalk.host.params import Prior
from radwalk.host.registry import Registry
from radwalk.inference.posterior import Posterior

PLUGIN = '''
import numpy as np
from radwalk import constants as k
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Prior, Validity
from radwalk.plugins.profiles import Polytrope


class Capped:
    """R ~ M^0.8, L ~ M^3.5 (rule of thumb, no source) with a 'wear' parameter allowed up to 1 / (M / M_sun)."""

    name = "capped"
    description = "invented: scaling relation with a mass-dependent cap on its parameter"
    params = (Param("wear", "", 0.0, 3.0, 0.1, "invented parameter, at most M_sun / M",
                    prior=Prior("uniform", 0.0, 3.0), sampled=True),)
    validity = Validity(mass=(0.5, 2.0))

    def predict(self, M, X, Z, opacity, wear=0.1):
        m = np.asarray(M, dtype=float) / k.M_SUN
        return k.R_SUN * m**0.8 * (1.0 + 0.1 * np.asarray(wear)), k.L_SUN * m**3.5

    def support(self, M, X, Z, wear=0.1):
        m = np.asarray(M, dtype=float) / k.M_SUN
        return np.asarray(wear) * m <= 1.0


class Tilted(Polytrope):
    """The polytrope with an invented profile-only parameter 'tilt', allowed up to the mass in M_sun."""

    name = "tilted"
    description = "invented: polytrope with a profile-only parameter capped by the mass"
    params = Polytrope.params + (Param("tilt", "", 0.0, 5.0, 0.1, "invented, at most M / M_sun",
                                       prior=Prior("uniform", 0.0, 5.0), sampled=True),)

    def profile(self, M, R, X, Z, n=3.0, tilt=0.1):
        return super().profile(M, R, X, Z, n=n)

    def support(self, M, X, Z, n=3.0, tilt=0.1):
        return np.asarray(tilt) <= np.asarray(M, dtype=float) / k.M_SUN


class BadSupport(Capped):
    name = "bad-support"
    description = "invented: its support excludes its own defaults"

    def support(self, M, X, Z, wear=0.1):
        return np.zeros(np.size(M), dtype=bool)


class FloatSupport(Capped):
    name = "float-support"
    description = "invented: its support is not a bool mask"

    def support(self, M, X, Z, wear=0.1):
        return np.ones(np.size(M))


@hookimpl
def radwalk_relations():
    return [Capped(), BadSupport(), FloatSupport()]


@hookimpl
def radwalk_profiles():
    return [Tilted()]
'''


@pytest.fixture(scope="module")
def plugin(tmp_path_factory):
    path = tmp_path_factory.mktemp("support") / "capped_plugin.py"
    path.write_text(PLUGIN)
    return str(path)


@pytest.fixture(scope="module")
def reg(plugin):
    return Registry(plugin_files=(plugin,), entry_points=False)


def _post(reg, profile="polytrope"):
    stages = StageSet.build(reg, {"relation": "capped", "profile": profile})
    obs = Observations({"radius": 1.1 * k.R_SUN, "luminosity": 1.5 * k.L_SUN, "teff": np.nan},
                       {"radius": 0.02 * k.R_SUN, "luminosity": 0.05 * k.L_SUN, "teff": np.nan})
    cfg = RunConfig(stages={"relation": "capped", "profile": profile},
                    priors={"mass": Prior("uniform", 0.5, 2.0)})
    return Posterior(stages, obs, cfg)


def test_posterior_is_minus_inf_outside_the_declared_support(reg):
    post = _post(reg)
    j_m, j_w = post.names.index("mass"), post.names.index("wear")
    theta = np.tile(post.sample_prior(np.random.default_rng(1), 1), (4, 1))
    theta[:, j_m] = [1.0, 1.0, 1.6, 1.6]
    theta[:, j_w] = [0.9, 1.1, 0.6, 0.7]  # inside, outside (cap 1), inside, outside (cap 0.625)
    lp = post(theta)
    assert np.isfinite(lp[[0, 2]]).all() and np.all(lp[[1, 3]] == -np.inf)
    assert np.isfinite(post.log_prior(theta[[0, 2]])).all()
    assert np.all(post.log_prior(theta[[1, 3]]) == -np.inf)


def test_prior_draws_stay_inside_the_support(reg, rng):
    post = _post(reg)
    draws = post.sample_prior(rng, 5000)
    m, w = draws[:, post.names.index("mass")], draws[:, post.names.index("wear")]
    assert np.all(w * m <= 1.0)
    # Drawn from the product of the priors restricted to the support: the wear, uniform on 0..3 before the cut,
    # is uniform below the cap, so at masses near 1 (cap ~1) its mean is ~0.5.
    near = (m > 0.95) & (m < 1.05)
    assert abs(w[near].mean() - 0.5) < 0.05


def test_profile_only_parameters_are_drawn_inside_the_support(reg, rng):
    post = _post(reg, profile="tilted")
    assert [p.name for p, _ in post.independent] == ["n", "tilt"]
    theta = np.tile(post.sample_prior(rng, 1), (3000, 1))
    theta[:, post.names.index("mass")] = np.linspace(0.5, 2.0, 3000)
    theta[:, post.names.index("wear")] = 0.1
    indep = post.draw_independent(rng, 3000, theta=theta)
    tilt = indep[:, [p.name for p, _ in post.independent].index("tilt")]
    assert np.all(tilt <= theta[:, post.names.index("mass")])


def test_a_parameter_the_profile_shares_with_the_relation_is_sampled(registry, small_track_grid):
    stages = StageSet.build(registry, {"profile": "track-grid", "relation": "track-grid"},
                            {"track-grid": {"grid": small_track_grid}})
    obs = Observations({"radius": k.R_SUN, "luminosity": k.L_SUN, "teff": np.nan},
                       {"radius": 0.02 * k.R_SUN, "luminosity": 0.05 * k.L_SUN, "teff": np.nan})
    post = Posterior(stages, obs, RunConfig(settings={"grid": small_track_grid}))
    assert "age" in post.names and not post.independent


def test_contract_checks_a_declared_support(reg):
    good = check_component(reg.entries["relation"]["capped"], registry=reg)
    assert good.passed, good.format_table()
    assert [r for r in good.rows if r.check == "support"][0].passed
    bad = {r.check: r for r in check_component(reg.entries["relation"]["bad-support"], registry=reg).rows}
    assert not bad["support"].passed and "defaults must lie inside" in bad["support"].detail
    flt = {r.check: r for r in check_component(reg.entries["relation"]["float-support"], registry=reg).rows}
    assert not flt["support"].passed and "expected bool" in flt["support"].detail
    # components without a support get no such row
    plain = check_component(reg.entries["relation"]["homology"], registry=reg)
    assert "support" not in [r.check for r in plain.rows]


def test_one_star_outside_the_support_is_refused_in_words(reg):
    from radwalk.forward.one_star import model_star

    stages = StageSet.build(reg, {"relation": "capped"})
    with pytest.raises(ModelError, match=r"has no model for mass = 1.6 M_sun, X = 0.7, Z = 0.02, wear = 0.7"):
        model_star(stages, 1.6, 0.7, 0.02, {"wear": 0.7})
    assert model_star(stages, 1.6, 0.7, 0.02, {"wear": 0.6}).summary["radius_rsun"] > 0


def test_prior_draws_follow_the_joint_age_prior(registry, small_track_grid):
    # The track grid's age prior is uniform up to each mass's own lifetime (its support age <= t_MS and its
    # joint term -log min(t_MS, 13.8 Gyr)).  Drawn from it, the mass keeps its declared uniform prior and the
    # phase age / min(t_MS, 13.8 Gyr) is uniform; the support alone would favour long-lived masses (an age
    # drawn on 0..13.8 Gyr survives with probability min(t_MS, 13.8) / 13.8: ~0.2 at 2 M_sun, 1 near 1 M_sun).
    from radwalk.plugins.track_grid import AGE_OF_UNIVERSE_GYR

    cfg = RunConfig(stages={"profile": "track-grid", "relation": "track-grid"},
                    settings={"grid": small_track_grid},
                    priors={"mass": Prior("uniform", 0.8, 2.0), "Z": Prior("log-uniform", 0.01, 0.02)})
    stages = StageSet.build(registry, cfg.stages, {"track-grid": {"grid": small_track_grid}})
    obs = Observations({"radius": k.R_SUN, "luminosity": k.L_SUN, "teff": np.nan},
                       {"radius": 0.02 * k.R_SUN, "luminosity": 0.05 * k.L_SUN, "teff": np.nan})
    post = Posterior(stages, obs, cfg)
    draws = post.sample_prior(np.random.default_rng(5), 4000)
    v = post.values(draws)
    life = stages.quick_quantities(v)["main_sequence_lifetime"]
    phase = v["age"] / np.minimum(life, AGE_OF_UNIVERSE_GYR)
    # Uniform distributions: mean 1/2 with standard error 0.29 / sqrt(4000) = 0.005 (and the masses' mean 1.4
    # with 0.35 / sqrt(4000) = 0.006); 4 standard errors, plus the resampling's repeats (~10 %).
    assert abs(phase.mean() - 0.5) < 0.025
    assert abs(v["mass"].mean() - 1.4) < 0.03
    assert np.mean(v["mass"] > 1.4) == pytest.approx(0.5, abs=0.04)
