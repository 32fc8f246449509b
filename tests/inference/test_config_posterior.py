"""Run configuration, priors and the posterior's edge behaviour (issue 3)."""

import numpy as np
import pytest

from radwalk.errors import ConfigError
from radwalk.host import config as cfgmod
from radwalk.host.components import Observations
from radwalk.host.params import Prior
from radwalk.inference.fit import stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.star import Star


def test_unknown_keys_name_the_key_and_suggest():
    with pytest.raises(ConfigError, match=r"unknown key \[sampler\] 'walker' \(did you mean 'walkers'\?\)"):
        cfgmod.from_dict({"sampler": {"walker": 32}})
    with pytest.raises(ConfigError, match=r"unknown key 'stage' \(did you mean 'stages'\?\)"):
        cfgmod.from_dict({"stage": {}})
    with pytest.raises(ConfigError, match=r"\[priors.mass\] 'lowr'"):
        cfgmod.from_dict({"priors": {"mass": {"kind": "uniform", "lowr": 1, "upper": 2}}})


def test_impossible_prior():
    with pytest.raises(ConfigError, match="lower bound 2 is not below upper bound 1"):
        cfgmod.from_dict({"priors": {"mass": {"kind": "uniform", "lower": 2, "upper": 1}}})
    with pytest.raises(ConfigError, match="unknown prior kind 'flat'"):
        Prior("flat", 0, 1)


def test_toml_round_trip(tmp_path):
    text = """
    [stages]
    opacity = ["combined", "kramers"]
    [settings]
    floor_luminosity = 0.08
    [priors.mass]
    kind = "kroupa"
    lower = 0.3
    upper = 20
    [sampler]
    walkers = 24
    [run]
    seed = 9
    """
    p = tmp_path / "run.toml"
    p.write_text(text)
    c = cfgmod.load(p)
    assert c.opacity_names() == ("combined", "kramers")
    assert c.priors["mass"].kind == "kroupa" and c.sampler.walkers == 24 and c.seed == 9
    q = tmp_path / "again.toml"
    q.write_text(cfgmod.to_toml(c.to_dict()))
    assert cfgmod.load(q).to_dict() == c.to_dict()


def test_bad_toml_is_one_clear_error(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text("[sampler\nwalkers = 3")
    with pytest.raises(ConfigError, match="is not valid TOML"):
        cfgmod.load(p)


# The quick textbook stages, whose sampled parameters are mass, X and Z (the default track grid samples mass, Z
# and age, with X from Z): the posterior's mechanics are tested on them.
TEXTBOOK = {"profile": "polytrope", "relation": "homology"}


def _post(config=None, star=None, feh=None):
    config = config or cfgmod.RunConfig(stages=TEXTBOOK)
    star = star or Star.from_user_units("p", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    return Posterior(stages_for(config), star.observations(), config, feh=feh)


def test_log_probability_is_minus_inf_outside_never_nan():
    post = _post()
    theta = np.array([
        [1.0, 0.7, 0.02],     # fine
        [-1.0, 0.7, 0.02],    # negative mass
        [np.nan, 0.7, 0.02],  # NaN
        [1.0, 0.9, 0.02],     # X outside its prior
        [1.0, 0.7, 0.5],      # Z outside its prior
        [1e3, 0.7, 0.02],     # mass outside its prior
    ])
    lp = post(theta)
    assert np.isfinite(lp[0])
    assert np.all(lp[1:] == -np.inf)
    assert not np.isnan(lp).any()


def test_priors_density_and_samples():
    rng = np.random.default_rng(0)
    for prior in (Prior("uniform", 0, 2), Prior("log-uniform", 0.1, 10), Prior("normal", -np.inf, np.inf, 0, 1),
                  Prior("truncated-normal", 0, 3, 1, 1), Prior("salpeter", 0.5, 20), Prior("kroupa", 0.05, 20)):
        x = prior.sample(rng, 2000)
        assert x.shape == (2000,) and np.all(np.isfinite(prior.logpdf(x)))
        assert np.all(x >= prior.lower) and np.all(x <= prior.upper)
    # Salpeter (1955): dN/dM ~ M^-2.35, so the density ratio between 1 and 2 M_sun is 2^2.35
    s = Prior("salpeter", 0.5, 20)
    assert s.logpdf(np.array([1.0]))[0] - s.logpdf(np.array([2.0]))[0] == pytest.approx(2.35 * np.log(2))
    # Kroupa (2001): slope -1.3 below 0.5 M_sun and -2.3 above, continuous
    kr = Prior("kroupa", 0.05, 20)
    a, b, c = kr.logpdf(np.array([0.25, 0.5, 1.0]))
    assert a - b == pytest.approx(1.3 * np.log(2)) and b - c == pytest.approx(2.3 * np.log(2))


def test_feh_prior_pulls_z():
    base = Star.from_user_units("f", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    post_rich = _post(star=base, feh=(0.3, 0.05))
    post_poor = _post(star=base, feh=(-0.5, 0.05))
    z = np.array([[1.0, 0.70, 0.03], [1.0, 0.70, 0.004]])
    lr = post_rich.log_prior(z)
    lp = post_poor.log_prior(z)
    assert lr[0] > lr[1] and lp[1] > lp[0]


def test_prior_override_and_fixed_setting():
    c = cfgmod.from_dict({"priors": {"mass": {"kind": "uniform", "lower": 0.5, "upper": 2}},
                          "settings": {"X": 0.7}, "stages": TEXTBOOK})
    post = _post(c)
    assert post.names == ["mass", "Z"] and post.fixed["X"] == 0.7
    assert post.priors[0].kind == "uniform"


def test_unknown_parameter_in_config():
    c = cfgmod.from_dict({"settings": {"masss": 1.0}})
    with pytest.raises(ConfigError, match="did you mean 'mass'"):
        _post(c)


def test_prior_outside_allowed_range():
    c = cfgmod.from_dict({"priors": {"X": {"kind": "uniform", "lower": 0.5, "upper": 1.2}}, "stages": TEXTBOOK})
    with pytest.raises(ConfigError, match="reaches outside its allowed range"):
        _post(c)


def test_observations_present():
    obs = Observations({"radius": 1.0, "luminosity": np.nan, "teff": 5000.0}, {})
    assert obs.present() == ["radius", "teff"]
