"""`radwalk model`: the forward model of one star of given mass and composition."""

from __future__ import annotations

from radwalk.cli.args import finite_float, parse_set
from radwalk.host.stages import STAGE_TABLE


def add_model_parser(sub, common):
    m = sub.add_parser("model", parents=[common], help="interior and timescales of one star of given mass")
    m.add_argument("--mass", type=finite_float, required=True, help="mass in M_sun")
    m.add_argument("--X", type=finite_float, default=None,
                   help="hydrogen mass fraction (default: the model's composition rule for the track grid, else solar)")
    m.add_argument("--Z", type=finite_float, default=None,
                   help="metal mass fraction (default: the calibrated Sun's initial Z for the track grid, else solar)")
    m.add_argument("--radius", type=finite_float, help="radius in R_sun, replacing the relation's")
    m.add_argument("--luminosity", type=finite_float, help="luminosity in L_sun, replacing the relation's")
    for stage in STAGE_TABLE:
        if stage.forward:
            m.add_argument(f"--{stage.name}", help=f"{stage.noun} (default {stage.default})")
    m.add_argument("--age", type=finite_float, metavar="GYR",
                   help="age in Gyr since the zero-age main sequence (default 0: zero-age); a profile or relation "
                        "without an age (polytrope, homology) gets the solved star for the other")
    m.add_argument("--set", action="append", metavar="NAME=VALUE", help="component parameter or option")
    m.add_argument("--json", action="store_true", help="print one JSON object")
    m.add_argument("--profile-out", metavar="FILE", help="write the radial profile (ECSV, with units)")
    m.set_defaults(func=cmd_model)
    return m


def cmd_model(args):
    from pathlib import Path

    from radwalk.api import one_star
    from radwalk.errors import ConfigError
    from radwalk.forward.one_star import format_summary

    if args.profile_out and Path(args.profile_out).is_dir():
        raise ConfigError(f"--profile-out {args.profile_out} is a folder; give a file name (e.g. profile.ecsv)")
    if args.profile_out:  # a misspelt folder is refused before the model runs, never created
        parent = Path(args.profile_out).expanduser().parent
        if not parent.is_dir():
            what = "is not a folder" if parent.exists() else "does not exist"
            raise ConfigError(f"--profile-out {args.profile_out}: the folder {parent} {what}; create it first")

    stages_named = {s.name: getattr(args, s.name) for s in STAGE_TABLE if s.forward and getattr(args, s.name)}
    interior = one_star(args.mass, args.X, args.Z, stages=stages_named, settings=parse_set(args.set),
                        plugins=args.plugin, age=args.age, radius=args.radius, luminosity=args.luminosity)
    if args.profile_out:
        from radwalk.results.files import write_table

        write_table(interior.profile_table, args.profile_out)
    if args.json:
        from radwalk.results.files import dumps

        print(dumps(interior.summary))
    else:
        print(format_summary(interior.summary))
    return 0
