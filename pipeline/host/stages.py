"""The four stages of the forward model, in the one table the rest of radwalk reads.

A run picks one component per stage.  Everything that needs the list of
stages -- the registry (which hook collects which stage, which method a
component must have), the contract checks, the run config's ``[stages]``
section and its defaults, the stage set of a model, the command-line help --
takes it from :data:`STAGE_TABLE` here, so a stage is added or renamed in one
place.
"""

from __future__ import annotations

from dataclasses import dataclass

from radwalk.errors import ConfigError
from radwalk.host.components import Likelihood, OpacityLaw, ProfileModel, Relation


@dataclass(frozen=True)
class Stage:
    """One stage of the forward model.

    Attributes
    ----------
    name : str
        The stage's name, as in ``[stages]`` of a run config and ``--<name>``.
    hook : str
        The provider hook of :mod:`radwalk.host.hookspecs` that collects its components.
    protocol : type
        The component protocol of :mod:`radwalk.host.components`.
    method : str
        The method a component of this stage must have.
    default : str
        The built-in component used when a run names none.
    noun : str
        What a component of this stage is, in a few words (help texts).
    description : str
        What the stage computes, in one line.
    range_keys : tuple of str
        Validity ranges, besides X and Z, over which a component of this
        stage is evaluated (and its contract checked): ``"T"`` and ``"rho"``
        for a law of the local state, ``"mass"`` for one of the whole star.
    forward : bool
        Whether the forward model (``radwalk model``) uses it; the likelihood
        only compares predictions with observations.
    """

    name: str
    hook: str
    protocol: type
    method: str
    default: str
    noun: str
    description: str
    range_keys: tuple[str, ...]
    forward: bool = True


STAGE_TABLE: tuple[Stage, ...] = (
    Stage("profile", "radwalk_profiles", ProfileModel, "profile", "track-grid", "profile model",
          "radial structure r, m, rho, P, T, beta of stars of given M, R, X, Z", ("mass",)),
    Stage("opacity", "radwalk_opacities", OpacityLaw, "kappa", "combined", "opacity law",
          "Rosseland-mean opacity kappa(rho, T, X, Z) in cm^2/g", ("T", "rho")),
    Stage("relation", "radwalk_relations", Relation, "predict", "track-grid", "mass-radius-luminosity relation",
          "radius and luminosity of a star of given mass and composition", ("mass",)),
    Stage("likelihood", "radwalk_likelihoods", Likelihood, "loglike", "gaussian", "likelihood",
          "log-likelihood of the predicted radius, luminosity and T_eff given the observed ones", (),
          forward=False),
)

STAGES: tuple[str, ...] = tuple(s.name for s in STAGE_TABLE)
BY_NAME: dict[str, Stage] = {s.name: s for s in STAGE_TABLE}
DEFAULTS: dict[str, str] = {s.name: s.default for s in STAGE_TABLE}
HOOKS: dict[str, str] = {s.name: s.hook for s in STAGE_TABLE}


def stage(name: str) -> Stage:
    """The stage called ``name``, or a ConfigError listing the stages."""
    try:
        return BY_NAME[name]
    except KeyError:
        raise ConfigError(f"unknown stage {name!r}; stages: {', '.join(STAGES)}") from None


def stage_of(component) -> str:
    """The stage a component belongs to, from the method it has.

    Raises
    ------
    ConfigError
        If it has the method of no stage, or of more than one.
    """
    found = [s.name for s in STAGE_TABLE if callable(getattr(component, s.method, None))]
    if len(found) == 1:
        return found[0]
    label = getattr(component, "name", type(component).__name__)
    methods = ", ".join(f"{s.method}() ({s.name})" for s in STAGE_TABLE)
    if not found:
        raise ConfigError(f"{label!r} has none of the stage methods {methods}; it is not a component")
    raise ConfigError(f"{label!r} has the methods of several stages ({', '.join(found)}); name its stage")
