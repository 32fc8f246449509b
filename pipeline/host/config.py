"""Run configuration: a TOML file read into a frozen, validated RunConfig.

Layout (every section optional)::

    [stages]                # one component per stage; opacity may be a list to compare laws
    profile = "track-grid"
    opacity = "combined"
    relation = "track-grid"
    likelihood = "gaussian"

    [settings]              # hold a parameter fixed, or set a component's text option
    n = 3.0
    floor_luminosity = 0.08

    [priors.mass]           # override a prior: uniform, log-uniform, normal,
    kind = "kroupa"         # truncated-normal, salpeter, kroupa
    lower = 0.3
    upper = 20

    [priors.kappa_0]        # sample a parameter with its declared prior (kind and
                            # bounds not restated: each key left out is the declared one's)

    [sampler]
    walkers = 32
    chunk = 200
    max_steps = 20000
    tau_multiple = 50
    tau_change = 0.01
    optimizer_starts = 4
    derived_samples = 1500

    [metallicity]
    solar_z = 0.0134        # Z of the scale on which [Fe/H] is measured
    solar_x = 0.7381

    [columns]               # catalog column names, if they differ from the defaults
    id = "name"

    [run]
    seed = 1
    plugins = ["my_opacity.py"]

Unknown keys are refused with the closest valid key suggested.
"""

from __future__ import annotations

import math
import sys
from dataclasses import asdict, dataclass, field, fields, replace
from pathlib import Path

import tomli_w

from radwalk.constants import X_SUN, Z_SUN
from radwalk.errors import ConfigError
from radwalk.host.params import Prior
from radwalk.host.registry import suggest
from radwalk.host.stages import DEFAULTS, STAGES

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

CATALOG_COLUMNS = ("id", "radius", "radius_err", "luminosity", "luminosity_err", "teff", "teff_err",
                   "feh", "feh_err")


# Largest sampler settings a run accepts: beyond these a fit would exhaust memory or never end, and each star
# would fail with an internal error instead of the config being refused (common practice, no source: emcee
# needs only a few times as many walkers as parameters).
_SAMPLER_MAX = {"walkers": 4096, "chunk": 1_000_000, "max_steps": 100_000_000, "optimizer_starts": 1000,
                "derived_samples": 1_000_000}


@dataclass(frozen=True)
class SamplerConfig:
    walkers: int = 32
    chunk: int = 200
    max_steps: int = 20000
    tau_multiple: float = 50.0
    tau_change: float = 0.01
    optimizer_starts: int = 4
    derived_samples: int = 1500

    def __post_init__(self):
        for name in ("walkers", "chunk", "max_steps", "optimizer_starts", "derived_samples"):
            v = getattr(self, name)
            if not isinstance(v, int) or isinstance(v, bool) or v < 1:
                raise ConfigError(f"sampler.{name} must be a positive integer, got {v!r}")
        for name, most in _SAMPLER_MAX.items():
            if getattr(self, name) > most:
                raise ConfigError(f"sampler.{name} = {getattr(self, name)} is more than {most}, the most a run allows")
        for name in ("tau_multiple", "tau_change"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise ConfigError(f"sampler.{name} must be a finite number, got {v!r}")
        if self.walkers < 8 or self.walkers % 2:
            raise ConfigError(f"sampler.walkers must be an even number >= 8, got {self.walkers}")
        if not self.tau_multiple > 0 or not 0 < self.tau_change < 1:
            raise ConfigError("sampler.tau_multiple must be > 0 and sampler.tau_change in (0, 1)")


@dataclass(frozen=True)
class PriorRequest:
    """A ``[priors.NAME]`` table that leaves out some of kind, bounds, mean and sigma: the rest is the declared prior's.

    ``[priors.kappa_0]`` alone asks to sample kappa_0 with the prior its component declares
    (:meth:`radwalk.host.params.Param.default_prior`); ``lower = 5`` alone narrows that prior's lower bound;
    a new ``kind`` without bounds keeps the declared bounds.  Completed by :meth:`complete` once the
    component is known.
    """

    name: str
    kind: str | None = None
    lower: float | None = None
    upper: float | None = None
    mean: float | None = None
    sigma: float | None = None

    def complete(self, declared: Prior) -> Prior:
        """The prior asked for: the given values, each missing one taken from ``declared``.

        Raises
        ------
        ConfigError
            Naming the table, what was given and the declared prior, if the result is not a valid prior.
        """
        kind = self.kind or declared.kind
        normal = ("normal", "truncated-normal")
        # a declared mean and sigma carry over only between normal kinds
        inherit = kind in normal and declared.kind in normal
        values = {
            "lower": declared.lower if self.lower is None else self.lower,
            "upper": declared.upper if self.upper is None else self.upper,
            "mean": declared.mean if self.mean is None and inherit else self.mean,
            "sigma": declared.sigma if self.sigma is None and inherit else self.sigma,
        }
        try:
            return Prior(kind, values["lower"], values["upper"], values["mean"], values["sigma"])
        except ConfigError as exc:
            given = ", ".join(f"{k} = {v!r}" for k, v in self.to_dict().items()) or "nothing"
            raise ConfigError(f"[priors.{self.name}]: {exc} (given: {given}; the rest from the declared prior "
                              f"{declared.describe()})") from None

    def describe(self) -> str:
        given = ", ".join(f"{k}={v!r}" for k, v in self.to_dict().items())
        return f"declared prior{' with ' + given if given else ''}"

    def to_dict(self) -> dict:
        return {key: getattr(self, key) for key in _PRIOR_KEYS if getattr(self, key) is not None}


class PriorTable(dict):
    """``[priors]``: parameter name -> Prior, or PriorRequest for a table that leaves values to the declared prior.

    ``get(name, declared)`` gives the prior a fit uses: a full Prior as it is, a PriorRequest completed from
    ``declared`` (the parameter's declared prior), so callers that ask
    ``config.priors.get(p.name, p.default_prior())`` get a complete Prior either way.
    """

    def get(self, name, default=None):
        value = super().get(name, default)
        if isinstance(value, PriorRequest) and isinstance(default, Prior):
            return value.complete(default)
        return value


@dataclass(frozen=True)
class RunConfig:
    """Everything a run needs besides the catalog, validated."""

    stages: dict = field(default_factory=dict)  # stage -> name (opacity may be a tuple of names)
    settings: dict = field(default_factory=dict)  # name -> float or str
    priors: dict = field(default_factory=PriorTable)  # name -> Prior or PriorRequest (see PriorTable)
    sampler: SamplerConfig = field(default_factory=SamplerConfig)
    solar_z: float = Z_SUN
    solar_x: float = X_SUN
    columns: dict = field(default_factory=dict)
    seed: int = 1
    plugins: tuple = ()

    def opacity_names(self) -> tuple:
        op = self.stages.get("opacity", DEFAULTS["opacity"])
        return tuple(op) if isinstance(op, (list, tuple)) else (op,)

    def stage_names(self, opacity: str | None = None) -> dict:
        names = {k: v for k, v in self.stages.items() if k != "opacity"}
        names["opacity"] = opacity or self.opacity_names()[0]
        return names

    def prior_for(self, param) -> Prior | None:
        """The prior a fit gives ``param`` (a :class:`~radwalk.host.params.Param`) if the config asks to sample it:
        its ``[priors]`` table, completed from the declared prior; None when the config gives it no prior."""
        if param.name not in self.priors:
            return None
        return PriorTable(self.priors).get(param.name, param.default_prior())

    def with_changes(self, **kw) -> RunConfig:
        return replace(self, **kw)

    def to_dict(self) -> dict:
        d = {
            "stages": {k: list(v) if isinstance(v, tuple) else v for k, v in self.stages.items()},
            "settings": dict(self.settings),
            "priors": {k: p.to_dict() for k, p in self.priors.items()},
            "sampler": asdict(self.sampler),
            "metallicity": {"solar_z": self.solar_z, "solar_x": self.solar_x},
            "columns": dict(self.columns),
            "run": {"seed": self.seed, "plugins": list(self.plugins)},
        }
        return d


_SECTIONS = {
    "stages": STAGES,
    "settings": None,
    "priors": None,
    "sampler": tuple(f.name for f in fields(SamplerConfig)),
    "metallicity": ("solar_z", "solar_x"),
    "columns": CATALOG_COLUMNS,
    "run": ("seed", "plugins"),
}
_PRIOR_KEYS = ("kind", "lower", "upper", "mean", "sigma")


def sampled_names(config: RunConfig, params) -> list[str]:
    """Names of ``params`` (Param records) a fit under ``config`` samples: sampled by default or given a prior,
    and not held at a number under ``[settings]`` without a prior."""
    out = []
    for p in params:
        held = p.name in config.settings and not isinstance(config.settings[p.name], str)
        if p.name in config.priors or (p.sampled and not held):
            out.append(p.name)
    return out


def refuse_sampled_opacity(config: RunConfig, stages) -> list[str]:
    """Refuses, before anything long starts, a sampled opacity parameter that the chosen stages cannot vary.

    A component that builds something per value of the opacity law's parameters (the track grid builds a
    grid of evolved tracks per value, an hour of CPU each) declares why in an attribute
    ``fixed_opacity_params`` (text); sampling an opacity parameter with it is refused here.

    Parameters
    ----------
    config : RunConfig
    stages : StageSet
        The chosen components (anything with ``opacity``, ``profile``, ``relation``, ``likelihood``).

    Returns
    -------
    list of str
        The opacity parameters the fit samples (with stages that can vary them).

    Raises
    ------
    ConfigError
        Naming the parameters, the stage that cannot vary them, why, and what to do instead.
    """
    law = stages.opacity
    sampled = sampled_names(config, law.params)
    if not sampled:
        return []
    for stage in STAGES:
        comp = getattr(stages, stage)
        why = getattr(comp, "fixed_opacity_params", None)
        if comp is law or not why:
            continue
        names = ", ".join(sampled)
        hold = " ".join(f"--set {n}=VALUE" for n in sampled)
        raise ConfigError(
            f"cannot sample {names} of opacity {law.name!r} with the {stage} {comp.name!r}: {why}.  Hold "
            f"{'it' if len(sampled) == 1 else 'them'} fixed ({hold}, or [settings]; no [priors.{sampled[0]}]), or "
            "fit with stages that solve each star with the sampled law: profile and relation 'solved' (a solved "
            "star per walker and step: slow), or the textbook 'polytrope' and 'homology'")
    return sampled


def _reject_unknown(where: str, keys, allowed):
    for key in keys:
        if key not in allowed:
            raise ConfigError(
                f"unknown key {where}{key!r}{suggest(key, allowed)}; allowed here: {', '.join(allowed)}"
            )


def _number(where: str, v, what: str = "a number") -> float:
    """``v`` as a float if it is a TOML number (not a boolean), else ConfigError naming ``where``."""
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ConfigError(f"{where} must be {what}, got {v!r}")
    return float(v)


def _solar(met: dict, key: str, default: float) -> float:
    v = _number(f"[metallicity] {key}", met.get(key, default), "a mass fraction between 0 and 1")
    if not (math.isfinite(v) and 0.0 < v < 1.0):
        raise ConfigError(f"[metallicity] {key} must be a mass fraction between 0 and 1, got {v!r}")
    return v


def from_dict(data: dict, base_dir: Path | None = None) -> RunConfig:
    """Validates a parsed TOML document into a RunConfig.

    A ``[provenance]`` table (what a run writes into its own run.toml) is
    information, not configuration, and is ignored, so a run's run.toml can
    be given back with ``--config``.
    """
    data = {k: v for k, v in data.items() if k != "provenance"}
    _reject_unknown("", data, tuple(_SECTIONS))
    for sec, allowed in _SECTIONS.items():
        if sec in data and not isinstance(data[sec], dict):
            raise ConfigError(f"[{sec}] must be a table")
        if allowed is not None and sec in data:
            _reject_unknown(f"[{sec}] ", data[sec], allowed)
    stages = dict(data.get("stages", {}))
    if isinstance(stages.get("opacity"), list):
        stages["opacity"] = tuple(stages["opacity"])
        if not stages["opacity"]:
            raise ConfigError("[stages] opacity list is empty")
    for k, v in stages.items():
        vals = v if isinstance(v, tuple) else (v,)
        if not all(isinstance(x, str) for x in vals):
            raise ConfigError(f"[stages] {k} must name a component (a string), got {v!r}")
    priors = PriorTable()
    for name, spec in data.get("priors", {}).items():
        if not isinstance(spec, dict):
            raise ConfigError(f"[priors.{name}] must be a table (empty for the declared prior, or with kind, "
                              "lower, upper)")
        _reject_unknown(f"[priors.{name}] ", spec, _PRIOR_KEYS)
        if "kind" in spec and (not isinstance(spec["kind"], str) or spec["kind"] not in Prior.KINDS):
            raise ConfigError(f"[priors.{name}] kind must be one of {', '.join(Prior.KINDS)}, got {spec['kind']!r}")
        nums = {key: _number(f"[priors.{name}] {key}", spec[key]) for key in ("lower", "upper", "mean", "sigma")
                if key in spec}
        needs = ("lower", "upper") + (("mean", "sigma") if spec.get("kind") in ("normal", "truncated-normal") else ())
        if "kind" not in spec or any(key not in nums for key in needs):
            # the rest comes from the declared prior, known once the stages are
            priors[name] = PriorRequest(name, spec.get("kind"), **nums)
            continue
        try:
            priors[name] = Prior(spec["kind"], nums["lower"], nums["upper"], nums.get("mean"), nums.get("sigma"))
        except ConfigError as exc:
            raise ConfigError(f"[priors.{name}]: {exc}") from None
    try:
        sampler = SamplerConfig(**data.get("sampler", {}))
    except TypeError as exc:
        raise ConfigError(f"[sampler]: {exc}") from None
    met = data.get("metallicity", {})
    solar_z, solar_x = _solar(met, "solar_z", Z_SUN), _solar(met, "solar_x", X_SUN)
    if solar_z + solar_x >= 1.0:
        raise ConfigError(f"[metallicity] solar_x + solar_z = {solar_x + solar_z:g} must be below 1")
    columns = dict(data.get("columns", {}))
    for key, v in columns.items():
        if not isinstance(v, str) or not v:
            raise ConfigError(f"[columns] {key} must be a column name (a non-empty string), got {v!r}")
    run = data.get("run", {})
    raw_plugins = run.get("plugins", [])
    if not isinstance(raw_plugins, list):
        raise ConfigError(f"[run] plugins must be a list of plugin file paths, got {raw_plugins!r}")
    for p in raw_plugins:
        if not isinstance(p, str) or not p:
            raise ConfigError(f"[run] plugins must be a list of plugin file paths (strings), got {p!r}")
    plugins = tuple(
        str((base_dir / p).resolve()) if base_dir and not Path(p).is_absolute() else str(p)
        for p in raw_plugins
    )
    seed = run.get("seed", 1)
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ConfigError(f"[run] seed must be a non-negative integer, got {seed!r}")
    settings = dict(data.get("settings", {}))
    for k, v in settings.items():
        if not isinstance(v, (int, float, str)) or isinstance(v, bool):
            raise ConfigError(f"[settings] {k} must be a number or a string, got {v!r}")
    return RunConfig(
        stages=stages, settings=settings, priors=priors, sampler=sampler,
        solar_z=solar_z, solar_x=solar_x, columns=columns, seed=seed, plugins=plugins,
    )


def load(path) -> RunConfig:
    """Reads and validates a run.toml."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read config {path}: {exc.strerror}") from None
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark, as some editors save, is no error
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise ConfigError(f"config {path} is not UTF-8 text (byte {raw[exc.start]:#04x} on line {line}); save it "
                          "as UTF-8") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"config {path} is not valid TOML: {exc}") from None
    return from_dict(data, base_dir=path.parent)


def _toml_ready(v):
    """Plain data tomli-w can write: None dropped from tables (TOML has no null; a list keeps the place as
    ""), numpy scalars as Python numbers, anything else that is not TOML (paths, dates) as its text."""
    if isinstance(v, dict):
        return {str(k): _toml_ready(x) for k, x in v.items() if x is not None}
    if isinstance(v, (list, tuple)):
        return ["" if x is None else _toml_ready(x) for x in v]
    if isinstance(v, (bool, int, float, str)):
        return v
    if hasattr(v, "item") and hasattr(v, "dtype"):  # a numpy scalar
        return _toml_ready(v.item())
    return str(v)


def to_toml(d: dict) -> str:
    """Nested plain data as TOML text, written by tomli-w (keys, strings, inf and nan quoted as TOML requires).

    Parameters
    ----------
    d : dict
        Tables (dicts), arrays (lists, tuples) and scalars; None values are left out.

    Returns
    -------
    str
        TOML that ``tomllib.loads`` reads back as ``d`` (without its None values), no trailing newline.
    """
    return tomli_w.dumps(_toml_ready(d)).rstrip("\n")
