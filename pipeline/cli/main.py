"""The `radwalk` command line.

Every deliberate error (a :class:`radwalk.errors.RadwalkError`) becomes one
line on stderr and exit status 2; warnings about validity ranges are printed
as ``warning:`` lines and go on.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings

from radwalk import __version__
from radwalk.errors import ConfigError, RadwalkError


def _parse_set(items):
    out = {}
    for item in items or ():
        if "=" not in item:
            raise ConfigError(f"--set needs NAME=VALUE, got {item!r}")
        name, value = item.split("=", 1)
        out[name.strip()] = value.strip()
    return out


def cmd_model(args):
    from pathlib import Path

    from radwalk.host.config import RunConfig
    from radwalk.inference.fit import stages_for
    from radwalk.model.forward import format_summary, model_star

    stages_named = {k: v for k, v in (("profile", args.profile), ("opacity", args.opacity),
                                      ("relation", args.relation)) if v}
    settings = _parse_set(args.set)
    plugins = tuple(str(Path(p).expanduser().resolve()) for p in args.plugin)
    stages = stages_for(RunConfig(stages=stages_named, settings=settings, plugins=plugins))
    params = {k: v for k, v in settings.items() if k not in stages.option_names()}
    interior = model_star(stages, args.mass, args.X, args.Z, params, radius=args.radius, luminosity=args.luminosity)
    if args.profile_out:
        from radwalk.results.files import write_table

        write_table(interior.profile_table, args.profile_out)
    if args.json:
        print(json.dumps(interior.summary, indent=2))
    else:
        print(format_summary(interior.summary))
    return 0


def cmd_plugins(args):
    from radwalk.host.registry import Registry

    registry = Registry(plugin_files=args.plugin)
    info = registry.describe()
    if args.json:
        print(json.dumps(info, indent=2))
        return 0
    for stage, comps in info.items():
        print(f"{stage}:")
        for c in comps:
            print(f"  {c['name']:<20} {c['description']}")
            print(f"  {'':<20} from: {c['source']}")
            print(f"  {'':<20} valid: {c['validity']}")
            for p in c["params"]:
                unit = f" [{p['unit']}]" if p["unit"] else ""
                pr = p["prior"]
                prior = f"{pr['kind']}[{pr['lower']:g}, {pr['upper']:g}]"
                how = (f"sampled, prior {prior}" if p["sampled"]
                       else f"held at {p['default']:g} unless given a [priors] entry (then default prior {prior})")
                print(f"  {'':<20}   {p['name']}{unit}: allowed [{p['lower']:g}, {p['upper']:g}]; {how}"
                      f" - {p['description']}")
            for o in c.get("options", []):
                print(f"  {'':<20}   option {o['name']}: {o['description']}")
        print()
    return 0


def _finite_float(text):
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None


def build_parser():
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--plugin", action="append", default=[], metavar="FILE",
                        help="load components from a plugin file (repeatable)")
    p = argparse.ArgumentParser(prog="radwalk", description="Stellar interiors and photon transport timescales "
                                "inferred from observed radius, luminosity and effective temperature.")
    p.add_argument("--version", action="version", version=f"radwalk {__version__}")
    sub = p.add_subparsers(dest="command", required=True)

    m = sub.add_parser("model", parents=[common], help="interior and timescales of one star of given mass")
    m.add_argument("--mass", type=_finite_float, required=True, help="mass in M_sun")
    m.add_argument("--X", type=_finite_float, default=None, help="hydrogen mass fraction (default: solar)")
    m.add_argument("--Z", type=_finite_float, default=None, help="metal mass fraction (default: solar)")
    m.add_argument("--radius", type=_finite_float, help="radius in R_sun, replacing the relation's")
    m.add_argument("--luminosity", type=_finite_float, help="luminosity in L_sun, replacing the relation's")
    m.add_argument("--profile", help="profile model (default polytrope)")
    m.add_argument("--opacity", help="opacity law (default combined)")
    m.add_argument("--relation", help="mass-radius-luminosity relation (default homology)")
    m.add_argument("--set", action="append", metavar="NAME=VALUE", help="component parameter or option")
    m.add_argument("--json", action="store_true", help="print one JSON object")
    m.add_argument("--profile-out", metavar="FILE", help="write the radial profile (ECSV, with units)")
    m.set_defaults(func=cmd_model)

    pl = sub.add_parser("plugins", parents=[common], help="list stages, components and their parameters")
    pl.add_argument("--json", action="store_true")
    pl.set_defaults(func=cmd_plugins)

    from radwalk.cli.fit import add_check_parser, add_fit_parser

    add_fit_parser(sub, common)
    add_check_parser(sub, common)
    _catalog_commands(sub, common)
    return p


def _catalog_commands(sub, common):
    """Catalog-run commands live in their own modules."""
    from radwalk.report.pages import add_report_parser
    from radwalk.run.orchestrate import add_demo_parser, add_run_parser

    add_run_parser(sub, common)
    add_report_parser(sub, common)
    add_demo_parser(sub, common)


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"warning: {message}", file=sys.stderr)


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "command", None) == "model":
        from radwalk.constants import X_SUN, Z_SUN

        args.X = X_SUN if args.X is None else args.X
        args.Z = Z_SUN if args.Z is None else args.Z
    warnings.showwarning = _show_warning
    try:
        return args.func(args)
    except RadwalkError as exc:
        print(f"radwalk: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("radwalk: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into `head` and the like
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":
    sys.exit(main())
