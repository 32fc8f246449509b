"""A [priors.NAME] table may leave kind and bounds to the parameter's declared prior; and an opacity parameter
is sampled only with stages that can vary it (the track grid cannot: refused before anything starts)."""

from __future__ import annotations

import pytest

from radwalk.errors import ConfigError
from radwalk.host import config as cfgmod
from radwalk.host.components import Observations
from radwalk.host.params import Prior
from radwalk.inference.cost import duration, opacity_sampling_cost
from radwalk.inference.fit import stages_for
from radwalk.inference.posterior import Posterior

TEXTBOOK = {"profile": "polytrope", "relation": "homology"}


def posterior(priors, stages=TEXTBOOK):
    config = cfgmod.from_dict({"priors": priors, "stages": stages})
    return config, Posterior(stages_for(config), Observations({}, {}), config)


def test_an_empty_table_samples_the_parameter_with_its_declared_prior():
    config, post = posterior({"g_bf": {}})
    declared = post.stages.param("g_bf").default_prior()
    assert "g_bf" in post.names
    assert post.priors[post.names.index("g_bf")] == declared == Prior("uniform", 0.1, 10.0)
    assert config.prior_for(post.stages.param("g_bf")) == declared
    assert config.prior_for(post.stages.param("g_ff")) is None


def test_values_left_out_come_from_the_declared_prior():
    _, post = posterior({"g_bf": {"lower": 0.5}, "g_ff": {"kind": "log-uniform"}})
    assert post.priors[post.names.index("g_bf")] == Prior("uniform", 0.5, 10.0)
    assert post.priors[post.names.index("g_ff")] == Prior("log-uniform", 0.1, 10.0)
    # a normal kind needs its mean and sigma: the declared uniform has none to give
    with pytest.raises(ConfigError, match=r"\[priors.g_bf\]: normal prior needs a mean and a positive sigma "
                                          r"\(given: kind = 'normal'; the rest from the declared prior "
                                          r"uniform\[0.1, 10\]\)"):
        posterior({"g_bf": {"kind": "normal"}})


def test_a_full_table_is_checked_when_read_and_a_partial_one_is_kept_as_given():
    with pytest.raises(ConfigError, match="impossible prior"):
        cfgmod.from_dict({"priors": {"mass": {"kind": "uniform", "lower": 2, "upper": 1}}})
    with pytest.raises(ConfigError, match=r"\[priors.mass\] kind must be one of uniform"):
        cfgmod.from_dict({"priors": {"mass": {"kind": "flat"}}})
    config = cfgmod.from_dict({"priors": {"g_bf": {}, "mass": {"upper": 3}}})
    assert config.to_dict()["priors"] == {"g_bf": {}, "mass": {"upper": 3.0}}
    # the run.toml a run writes gives the same config back
    text = cfgmod.to_toml(config.to_dict())
    assert "[priors.g_bf]" in text
    again = cfgmod.from_dict(cfgmod.tomllib.loads(text))
    assert again.priors == config.priors


def test_sampling_an_opacity_parameter_with_the_track_grid_is_refused_up_front():
    config = cfgmod.from_dict({"priors": {"g_bf": {}}})  # default stages: track-grid profile and relation
    with pytest.raises(ConfigError) as info:
        stages_for(config)
    text = str(info.value)
    assert text.startswith("cannot sample g_bf of opacity 'combined' with the profile 'track-grid': it reads "
                           "every star off a grid of evolved tracks")
    assert "Hold it fixed (--set g_bf=VALUE" in text and "'solved'" in text


def test_an_opacity_parameter_held_fixed_or_sampled_by_textbook_stages_is_not_refused():
    held = cfgmod.from_dict({"settings": {"g_bf": 2.0}})
    assert cfgmod.refuse_sampled_opacity(held, stages_for(held)) == []
    textbook = cfgmod.from_dict({"priors": {"g_bf": {}}, "stages": TEXTBOOK})
    assert cfgmod.refuse_sampled_opacity(textbook, stages_for(textbook)) == ["g_bf"]


def test_a_sampled_opacity_parameter_is_solved_directly_and_its_cost_stated():
    config = cfgmod.from_dict({"priors": {"g_bf": {}}, "stages": TEXTBOOK, "sampler": {"walkers": 8}})
    stages = stages_for(config)
    # a relation grid per sampled value would be built for one optimiser call and never reused
    assert stages.solve_directly and not stages_for(cfgmod.from_dict({"stages": TEXTBOOK})).solve_directly
    text = opacity_sampling_cost(config, stages, ["g_bf"])
    assert text.startswith("sampling g_bf of opacity 'combined': every step solves the relation 'homology' for "
                           "each of the 8 walkers with its own law (no grid); one step measured ")
    assert "per 1000 steps and at most " in text and "at max_steps = 20000" in text
    assert [duration(s) for s in (40, 210, 7560)] == ["40 s", "3.5 min", "2.1 h"]
