"""`radwalk check-plugin`: a plugin file, module or component against its stage contract."""

from __future__ import annotations

from pathlib import Path

from radwalk.cli.args import parse_set


def add_check_parser(sub, common):
    c = sub.add_parser("check-plugin", parents=[common],
                       help="check a plugin file, module or component against its stage contract")
    c.add_argument("target", help="a plugin file, an importable module, or a component name")
    c.add_argument("--set", action="append", metavar="NAME=VALUE", help="option for the component (e.g. table=FILE)")
    c.add_argument("--map", metavar="PNG", help="write a log-kappa map of each opacity law (default: <name>-kappa.png)")
    c.add_argument("--no-map", action="store_true", help="do not write the log-kappa map")
    c.set_defaults(func=cmd_check)


def _could_be_plugin(target: str) -> bool:
    """Whether ``target`` is an existing path or an importable module (whose load failure the table shows)."""
    import importlib.util

    if Path(target).expanduser().exists():
        return True
    try:
        return importlib.util.find_spec(target) is not None
    except (ImportError, ValueError):
        return False


def cmd_check(args):
    from radwalk.host.contracts import check_target, resolve_target
    from radwalk.report.opacity_map import plot_log_kappa_map

    options = parse_set(args.set) or None
    if not _could_be_plugin(args.target):
        resolve_target(args.target)  # names nothing at all: bad input (exit 2), unless a registered component
    reports = check_target(args.target, options=options)
    ok = True
    for rep in reports:
        print(rep.format_table())
        print()
        ok &= rep.passed
    if not args.no_map:
        try:
            _, entries = resolve_target(args.target)
        except Exception:  # noqa: BLE001 - the load failure is already in the table
            entries = []
        for entry in entries:
            if entry.stage != "opacity":
                continue
            path = Path(args.map) if args.map and len(entries) == 1 else Path(f"{entry.name}-kappa.png")
            try:
                plot_log_kappa_map(entry, path, options=options)
                print(f"log-kappa map: {path}")
            except Exception as exc:  # noqa: BLE001
                print(f"log-kappa map not written: {exc}")
    print("PASS" if ok else "FAIL")
    return 0 if ok else 1  # a check failed: exit status 1, as for a catalog with failed stars
