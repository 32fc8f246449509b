"""`radwalk grid build|list|info`: build, list and describe the cached grids of main-sequence tracks."""

from __future__ import annotations

from radwalk.cli.args import finite_float, int_at_least
from radwalk.errors import ConfigError


def add_grid_parser(sub, common):
    g = sub.add_parser("grid", parents=[common], help="build, list and describe cached grids of main-sequence tracks")
    gs = g.add_subparsers(dest="grid_command", required=True)

    b = gs.add_parser("build", parents=[common], help="compute a grid of tracks (cached; reused when it exists)")
    b.add_argument("--mass-range", type=finite_float, nargs=2, metavar=("LOW", "HIGH"), default=None,
                   help="smallest and largest mass, M_sun, with --masses equally spaced in log M "
                        "(default: the default grid's 39 masses over 0.6-8, closer over 0.9-2.8)")
    b.add_argument("--masses", type=int_at_least(1), default=None, help="masses over --mass-range (default 20)")
    b.add_argument("--z-range", type=finite_float, nargs=2, metavar=("LOW", "HIGH"), default=None,
                   help="smallest and largest metal fraction Z, with --metallicities equally spaced in log Z "
                        "(default: the default grid's 7 values over 0.003-0.04)")
    b.add_argument("--metallicities", type=int_at_least(1), default=None,
                   help="metallicities over --z-range (default 6)")
    b.add_argument("--for-catalog", metavar="CATALOG", default=None,
                   help="only the default grid's tracks this catalog's stars can need (from their luminosities "
                        "and [Fe/H]): a custom opacity law's grid at a fraction of the cost")
    b.add_argument("--phases", type=int_at_least(2), default=51, help="phase points per track (default 51)")
    b.add_argument("--X", type=finite_float, default=None,
                   help="one initial hydrogen fraction for every track (default: Y = Y_p + dY/dZ Z)")
    b.add_argument("--overshoot", type=finite_float, default=0.0, help="step core overshoot, pressure scale heights")
    b.add_argument("--opacity", default=None, help="opacity law by name (default: the built-in law of the solver)")
    b.add_argument("--workers", type=int_at_least(1), default=None, help="processes (default: all cores)")
    b.add_argument("--executor", choices=("local", "dask"), default="local",
                   help="where the tracks are computed: a local process pool or a Dask cluster (default local)")
    b.add_argument("--scheduler", default=None,
                   help="address of a running Dask scheduler (with --executor dask; default: a local cluster)")
    b.add_argument("--into", metavar="FOLDER", default=None,
                   help="write the grid file into this folder instead of the cache folder (the package's own "
                        "data/grids folder is where the shipped grid lives)")
    b.add_argument("--dry-run", action="store_true", help="print the estimated cost and stop")
    b.add_argument("--no-progress", action="store_true", help="no progress bar")
    b.set_defaults(func=cmd_grid_build)

    ls = gs.add_parser("list", parents=[common], help="grids in the cache folder")
    ls.add_argument("--json", action="store_true")
    ls.set_defaults(func=cmd_grid_list)

    i = gs.add_parser("info", parents=[common], help="settings, provenance and cost of one grid")
    i.add_argument("grid", help="key (or its first characters) or path of a grid file")
    i.add_argument("--json", action="store_true", help="print the file's whole header")
    i.set_defaults(func=cmd_grid_info)
    return g


def _opacity(args):
    """The opacity stage bound at its defaults: the default stages' law, or a named law (with --plugin files).

    The default is the law a fit uses by default, so that the grid built here is the one fits look up.
    """
    from pathlib import Path

    from radwalk.forward.model_grid import track_opacity
    from radwalk.host.config import RunConfig
    from radwalk.inference.fit import stages_for

    plugins = tuple(str(Path(p).expanduser().resolve()) for p in args.plugin)
    stages = stages_for(RunConfig(stages={"opacity": args.opacity} if args.opacity else {}, plugins=plugins))
    return track_opacity(stages.bound_opacity(stages.defaults()))


def _for_catalog(spec, path):
    """The spec cut to the tracks a catalog's stars can need (prints what it kept)."""
    import numpy as np

    from radwalk.forward.model_grid import catalog_ranges
    from radwalk.run.catalog import read_catalog

    catalog = read_catalog(path)
    L = [e.star.user_values()["luminosity"][0] for e in catalog if e.star is not None]
    feh = [e.star.feh if e.star.feh is not None else (np.nan, np.nan) for e in catalog if e.star is not None]
    mass_range, z_range = catalog_ranges(L, feh, spec)
    cut = spec.restricted(mass_range, z_range)
    print(f"{catalog.path.name}: {catalog.n_usable} stars need {cut.n_mass} of {spec.n_mass} masses "
          f"({cut.mass_range[0]:g}-{cut.mass_range[1]:g} M_sun) and {cut.n_z} of {spec.n_z} metallicities "
          f"(Z {cut.z_range[0]:g}-{cut.z_range[1]:g})")
    return cut


def cmd_grid_build(args):
    import os
    from pathlib import Path

    from radwalk.forward.model_grid import (
        DEFAULT_MASS_NODES,
        DEFAULT_Z_NODES,
        GridSpec,
        build_grid,
        describe,
        estimate_cpu_seconds,
        grid_key,
        grid_path,
        shipped_path,
    )

    # A count alone spreads that many tracks over the default grid's range.
    mass_range = args.mass_range or ((DEFAULT_MASS_NODES[0], DEFAULT_MASS_NODES[-1]) if args.masses else None)
    z_range = args.z_range or ((DEFAULT_Z_NODES[0], DEFAULT_Z_NODES[-1]) if args.metallicities else None)
    spec = GridSpec(mass_range=tuple(mass_range) if mass_range else None, n_mass=args.masses,
                    z_range=tuple(z_range) if z_range else None, n_z=args.metallicities,
                    n_phase=args.phases, alpha_ov=args.overshoot, X=args.X)
    if args.for_catalog:
        spec = _for_catalog(spec, args.for_catalog)
    if args.scheduler and args.executor != "dask":
        raise ConfigError("--scheduler needs --executor dask")
    kappa = _opacity(args)
    key = grid_key(kappa, spec)
    path = Path(args.into).expanduser() / grid_path(key).name if args.into else grid_path(key)
    workers = args.workers or os.cpu_count() or 1
    cpu = estimate_cpu_seconds(spec)
    tracks = spec.n_mass * spec.n_z
    for existing in (path, shipped_path(key)):
        if existing.is_file():
            print(f"grid exists: {existing}")
            return 0
    print(f"{tracks} tracks, estimated {cpu / 60:.1f} CPU minutes, about {cpu / 60 / min(workers, tracks):.1f} "
          f"minutes on {min(workers, tracks)} workers (rough: ~{cpu / tracks:.0f} s per track)")
    if args.dry_run:
        return 0
    runner = None
    if args.executor == "dask":
        from radwalk.run.executors import dask_tracks

        runner = dask_tracks(args.scheduler)
    from radwalk.cli.progress import stderr_is_terminal

    # the bar only on a terminal: in a log file its carriage-return frames pile up into one line
    grid = build_grid(kappa, spec, workers=workers, progress=not args.no_progress and stderr_is_terminal(),
                      runner=runner)
    try:
        grid.save(path)
    except OSError as exc:
        print(f"warning: {path} could not be written ({exc.strerror or exc})")
    header = dict(grid.header, path=str(path), size_bytes=path.stat().st_size if path.is_file() else 0)
    print(describe(header))
    if path.is_file():
        print(f"written: {path}")
    return failed_tracks_status(grid)


def failed_tracks_status(grid) -> int:
    """The exit status of a grid build: 0 when every track was computed, 1 when some failed (named on stderr).

    A failed track is NaN in the grid (:func:`radwalk.forward.model_grid.build_grid`); the grid is still
    written, and a fit whose star needs that track gets no model there.
    """
    import sys

    failed = grid.header["build"]["failed"]
    if not failed:
        return 0
    print(f"radwalk: {len(failed)} of {grid.header['build']['tracks']} tracks failed (NaN in the grid):",
          file=sys.stderr)
    for f in failed:
        print(f"  failed: {f['mass_msun']:.4g} M_sun, Z = {f['Z']:.4g}: {f['reason']}", file=sys.stderr)
    return 1


def cmd_grid_list(args):
    from radwalk.forward.grid import cache_dir
    from radwalk.forward.model_grid import describe, list_grids

    grids = list_grids()
    if args.json:
        from radwalk.results.files import dumps

        print(dumps(grids))
        return 0
    if not grids:
        print(f"no grids in {cache_dir()}")
        return 0
    for h in grids:
        print(describe(h) if not h.get("unreadable") else f"unreadable file: {h['path']}")
    return 0


def cmd_grid_info(args):
    from pathlib import Path

    from radwalk.errors import ConfigError
    from radwalk.forward.model_grid import describe, list_grids

    p = Path(args.grid).expanduser()
    matches = [h for h in list_grids() if h.get("key", "").startswith(args.grid) or h["path"] == str(p)]
    if not matches and p.is_file():
        matches = [h for h in list_grids(p.parent) if h["path"] == str(p)]
    if len(matches) != 1:
        raise ConfigError(f"{args.grid!r} names {'no' if not matches else len(matches)} grids; "
                          "give more of the key (see `radwalk grid list`) or a path")
    h = matches[0]
    if args.json:
        from radwalk.results.files import dumps

        print(dumps(h))
        return 0
    print(describe(h))
    print(f"  file: {h['path']}")
    print(f"  quantities: {', '.join(q['name'] for q in h['quantities'])}")
    print(f"  solver sources: {len(h['sources'])} modules hashed; opacity source sha256 "
          f"{(h['opacity'].get('source_sha256') or '?')[:16]}")
    return 0
