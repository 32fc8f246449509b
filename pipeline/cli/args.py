"""Argument helpers shared by the subcommands: number types, NAME=VALUE settings, the run config from options."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from radwalk.errors import ConfigError
from radwalk.host import config as config_mod
from radwalk.host.stages import STAGE_TABLE, STAGES

EXIT_CODES_TEXT = ("exit status: 0 every star fitted (or the command done), 1 some stars failed "
                   "(or some grid tracks, or a plugin check), 2 bad input (options, config, catalog or paths); "
                   "130 interrupted, 143 terminated (run again to resume)")
"""The exit statuses every subcommand keeps to, shown in ``--help``."""


def common_parser() -> argparse.ArgumentParser:
    """Options every subcommand takes (a parent parser)."""
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--plugin", action="append", default=[], metavar="FILE",
                        help="load components from a plugin file (repeatable)")
    return common


def add_config_options(parser: argparse.ArgumentParser, config_help: str = "run config (TOML)"):
    """The run-config options `fit`, `run` and `demo` share: --config, --seed, one option per stage and --set.

    :func:`config_from_args` lays them over the config file the same way for every subcommand.
    """
    parser.add_argument("--config", metavar="FILE", help=config_help)
    parser.add_argument("--seed", type=SEED, metavar="S", help="global random seed (replaces the config's, else 1)")
    for stage in STAGE_TABLE:
        if stage.name == "opacity":
            parser.add_argument("--opacity", metavar="LAW[,LAW...]",
                                help=f"{stage.noun}, or several separated by commas to compare them")
        else:
            parser.add_argument(f"--{stage.name}", metavar="NAME", help=stage.noun)
    parser.add_argument("--set", action="append", metavar="NAME=VALUE",
                        help="hold a parameter fixed or set an option (repeatable)")


def finite_float(text):
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None


def int_at_least(minimum: int):
    """An argparse type for whole numbers >= minimum."""
    def parse(text: str) -> int:
        try:
            v = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if v < minimum:
            raise argparse.ArgumentTypeError(f"must be at least {minimum}, got {v}")
        return v
    return parse


POSITIVE_INT = int_at_least(1)
SEED = int_at_least(0)


def parse_set(items) -> dict:
    """``--set NAME=VALUE`` items as a dict of strings."""
    out = {}
    for item in items or ():
        if "=" not in item:
            raise ConfigError(f"--set needs NAME=VALUE, got {item!r}")
        name, value = item.split("=", 1)
        out[name.strip()] = value.strip()
    return out


def config_from_args(args, validate: bool = True) -> config_mod.RunConfig:
    """The run config from --config, with the command-line choices laid over it.

    ``validate`` builds the chosen stages once, so a misspelt component or
    parameter fails here (catalog runs do that in the runner instead).
    """
    cfg = config_mod.load(args.config) if args.config else config_mod.RunConfig()
    stages = dict(cfg.stages)
    for stage in STAGES:
        if stage != "opacity" and getattr(args, stage, None):  # opacity may name several laws: below
            stages[stage] = getattr(args, stage)
    if getattr(args, "opacity", None):
        names = tuple(n.strip() for n in args.opacity.split(",") if n.strip())
        if not names:
            raise ConfigError(f"--opacity needs one or more law names separated by commas, got {args.opacity!r}")
        stages["opacity"] = names if len(names) > 1 else names[0]
    settings = dict(cfg.settings)
    for key, value in parse_set(getattr(args, "set", None)).items():
        try:
            settings[key] = float(value)
        except ValueError:
            settings[key] = value
    extra = (str(Path(p).expanduser().resolve()) for p in getattr(args, "plugin", None) or ())
    plugins = tuple(dict.fromkeys((*cfg.plugins, *extra)))
    seed = cfg.seed if getattr(args, "seed", None) is None else args.seed
    if seed < 0:
        raise ConfigError(f"--seed must be a non-negative integer, got {seed}")
    new = cfg.with_changes(stages=stages, settings=settings, plugins=plugins, seed=seed)
    if validate:
        validate_choices(new)
    return new


def validate_choices(cfg: config_mod.RunConfig):
    """Fails early (one line) on unknown components, options or parameter names."""
    from radwalk.host.components import Observations
    from radwalk.host.config import refuse_sampled_opacity
    from radwalk.inference.cost import opacity_sampling_cost
    from radwalk.inference.fit import stages_for
    from radwalk.inference.posterior import Posterior

    for op in cfg.opacity_names():
        stages = stages_for(cfg, op)  # refuses an opacity parameter the stages cannot sample
        Posterior(stages, Observations({}, {}), cfg)
        sampled = refuse_sampled_opacity(cfg, stages)
        if sampled:  # the stages can vary the law: say what it costs before the fit starts
            print(f"radwalk: {opacity_sampling_cost(cfg, stages, sampled)}", file=sys.stderr, flush=True)
