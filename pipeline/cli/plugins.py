"""`radwalk plugins`: every stage, component, parameter and where each came from."""

from __future__ import annotations


def add_plugins_parser(sub, common):
    pl = sub.add_parser("plugins", parents=[common], help="list stages, components and their parameters")
    pl.add_argument("--json", action="store_true")
    pl.set_defaults(func=cmd_plugins)
    return pl


def cmd_plugins(args):
    from radwalk.host.registry import Registry
    from radwalk.results.files import dumps

    registry = Registry(plugin_files=args.plugin)
    info = registry.describe()
    if args.json:
        print(dumps(info))
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
