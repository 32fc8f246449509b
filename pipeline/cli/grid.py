"""`radwalk grid build|list|info`: build, list and describe the cached grids of main-sequence tracks."""

from __future__ import annotations

from radwalk.cli.args import finite_float, int_at_least


def add_grid_parser(sub, common):
    g = sub.add_parser("grid", parents=[common], help="build, list and describe cached grids of main-sequence tracks")
    gs = g.add_subparsers(dest="grid_command", required=True)

    b = gs.add_parser("build", parents=[common], help="compute a grid of tracks (cached; reused when it exists)")
    b.add_argument("--mass-range", type=finite_float, nargs=2, metavar=("LOW", "HIGH"), default=(0.6, 8.0),
                   help="smallest and largest mass, M_sun (default 0.6 8)")
    b.add_argument("--masses", type=int_at_least(1), default=20, help="masses, equally spaced in log M (default 20)")
    b.add_argument("--z-range", type=finite_float, nargs=2, metavar=("LOW", "HIGH"), default=(0.003, 0.04),
                   help="smallest and largest metal fraction Z (default 0.003 0.04)")
    b.add_argument("--metallicities", type=int_at_least(1), default=6,
                   help="metallicities, equally spaced in log Z (default 6)")
    b.add_argument("--phases", type=int_at_least(2), default=51, help="phase points per track (default 51)")
    b.add_argument("--X", type=finite_float, default=None,
                   help="one initial hydrogen fraction for every track (default: Y = Y_p + dY/dZ Z)")
    b.add_argument("--overshoot", type=finite_float, default=0.0, help="step core overshoot, pressure scale heights")
    b.add_argument("--opacity", default=None, help="opacity law by name (default: the built-in law of the solver)")
    b.add_argument("--workers", type=int_at_least(1), default=None, help="processes (default: all cores)")
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
    """The opacity callable: the solver's built-in law, or a named law (with --plugin files) at its defaults."""
    if not args.opacity:
        from radwalk.physics.opacity import default_kappa

        return default_kappa
    from pathlib import Path

    from radwalk.host.config import RunConfig
    from radwalk.inference.fit import stages_for

    plugins = tuple(str(Path(p).expanduser().resolve()) for p in args.plugin)
    stages = stages_for(RunConfig(stages={"opacity": args.opacity}, plugins=plugins))
    return stages.bound_opacity(stages.defaults())


def cmd_grid_build(args):
    import os

    from radwalk.forward.model_grid import GridSpec, cached_grid, describe, estimate_cpu_seconds, grid_key, grid_path

    spec = GridSpec(mass_range=tuple(args.mass_range), n_mass=args.masses, z_range=tuple(args.z_range),
                    n_z=args.metallicities, n_phase=args.phases, alpha_ov=args.overshoot, X=args.X)
    kappa = _opacity(args)
    path = grid_path(grid_key(kappa, spec))
    workers = args.workers or os.cpu_count() or 1
    cpu = estimate_cpu_seconds(spec)
    tracks = spec.n_mass * spec.n_z
    if path.is_file():
        print(f"grid exists: {path}")
        return 0
    print(f"{tracks} tracks, estimated {cpu / 60:.1f} CPU minutes, about {cpu / 60 / min(workers, tracks):.1f} "
          f"minutes on {min(workers, tracks)} workers (rough: ~{cpu / tracks:.0f} s per track)")
    if args.dry_run:
        return 0
    grid = cached_grid(kappa, spec, workers=workers, progress=not args.no_progress)
    header = dict(grid.header, path=str(path), size_bytes=path.stat().st_size if path.is_file() else 0)
    print(describe(header))
    for f in grid.header["build"]["failed"]:
        print(f"  failed: {f['mass_msun']:.4g} M_sun, Z = {f['Z']:.4g}: {f['reason']}")
    print(f"written: {path}" if path.is_file() else "warning: the cache folder could not be written")
    return 0


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
