"""`radwalk fit`: one star's posterior from the command line."""

from __future__ import annotations

import math
import sys
from pathlib import Path

from radwalk.cli.args import add_config_options, config_from_args
from radwalk.cli.progress import ChainProgress
from radwalk.errors import ConfigError
from radwalk.host.stages import STAGES


def add_fit_parser(sub, common):
    f = sub.add_parser("fit", parents=[common], help="infer one star's interior and timescales from R, L, T_eff")
    f.add_argument("--id", default="star", help="name of the star (used for its folder)")
    f.add_argument("--radius", nargs=2, type=float, metavar=("VALUE", "ERR"), help="radius and error, R_sun")
    f.add_argument("--luminosity", nargs=2, type=float, metavar=("VALUE", "ERR"), help="luminosity and error, L_sun")
    f.add_argument("--teff", nargs=2, type=float, metavar=("VALUE", "ERR"), help="effective temperature and error, K")
    f.add_argument("--feh", nargs=2, type=float, metavar=("VALUE", "ERR"), help="[Fe/H] and error, dex (prior on Z)")
    f.add_argument("--out", help="output folder (default: radwalk-fit/<id>)")
    add_config_options(f)
    f.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    f.add_argument("--json", action="store_true", help="print the summary as JSON")
    f.set_defaults(func=cmd_fit)


def _fmt(d: dict) -> str:
    p16, p50, p84 = d["p16"], d["p50"], d["p84"]
    if not all(map(math.isfinite, (p16, p50, p84))):
        return "n/a"
    if p50 != 0 and (abs(p50) >= 1e5 or abs(p50) < 1e-3):
        return f"{p50:.4e}  -{p50 - p16:.2e} +{p84 - p50:.2e}"
    return f"{p50:.4g}  -{p50 - p16:.3g} +{p84 - p50:.3g}"


def format_fit(doc: dict) -> str:
    lines = [f"star {doc['id']}: {doc['status']}" + (f" ({doc['reason']})" if doc["reason"] else "")]
    if doc["status"] == "failed":
        return "\n".join(lines)
    st = doc["stages"]
    lines.append("stages: " + "  ".join(f"{name}={st[name]}" for name in STAGES))
    s = doc["sampler"]
    lines.append(f"sampler: {s['walkers']} walkers x {s['steps']} steps, burn {s['burn']}, thin {s['thin']}, "
                 f"acceptance {s['acceptance']:.2f}, tau_max {s['tau_max']:.1f}, "
                 f"converged {'yes' if s['converged'] else 'no'}; posterior-predictive p = {doc['ppc_pvalue']:.2f}")
    rows = [("parameter", "median  -/+ (16th-84th)", "unit", "")]
    for name, d in doc["parameters"].items():
        rows.append((name, _fmt(d), d["unit"], "" if d["constrained"] else "prior-dominated"))
    rows.append(("", "", "", ""))
    rows.append(("derived", "median  -/+ (16th-84th)", "unit", ""))
    for name, d in doc["derived"].items():
        rows.append((name, _fmt(d), d["unit"], ""))
    w = [max(len(r[i]) for r in rows) for i in range(4)]
    lines.append("")
    for r in rows:
        lines.append(f"  {r[0]:<{w[0]}}  {r[1]:<{w[1]}}  {r[2]:<{w[2]}}  {r[3]}".rstrip())
    if doc.get("comparison"):
        lines.append("")
        lines.append("opacity comparison (median, 16th-84th):")
        for op, c in doc["comparison"].items():
            if c.get("status") == "failed":
                lines.append(f"  {op:<20} failed (see the warning below)")
                continue
            m, t = c["parameters"]["mass"], c["derived"]["diffusion_time"]
            lines.append(f"  {op:<20} mass {_fmt(m)} M_sun   diffusion time {_fmt(t)} yr")
    for wtxt in doc.get("warnings", []):
        lines.append(f"warning: {wtxt}")
    return "\n".join(lines)


def cmd_fit(args):
    from radwalk.inference.fit import fit_star
    from radwalk.inference.star import Star
    from radwalk.results.document import result_document
    from radwalk.results.files import dumps
    from radwalk.results.layout import safe_folder_name

    cfg = config_from_args(args)
    obs = {}
    for key in ("radius", "luminosity", "teff"):
        pair = getattr(args, key)
        if pair is not None:
            obs[key], obs[f"{key}_err"] = pair
    if not obs:
        raise ConfigError("give at least one of --radius, --luminosity, --teff (each VALUE ERR)")
    feh = args.feh or (None, None)
    from radwalk.errors import CatalogError

    try:
        star = Star.from_user_units(args.id, **obs, feh=feh[0], feh_err=feh[1])
    except CatalogError as exc:
        raise ConfigError(str(exc)) from None
    out = Path(args.out) if args.out else Path("radwalk-fit") / safe_folder_name(args.id)
    _check_writable(out)
    progress = ChainProgress(cfg.sampler.max_steps, cfg.sampler.tau_multiple, laws=cfg.opacity_names())
    progress.begin(star.id, cfg.sampler.walkers)
    try:
        result = fit_star(star, cfg, outdir=out, plots=not args.no_plots, progress=progress)
    finally:
        progress.close()
    doc = result_document(star, cfg, result)
    if result.status == "failed":  # the input was fine, the star could not be fitted: exit status 1
        print(f"radwalk: star {star.id} failed: {result.reason}", file=sys.stderr)
        return 1
    if args.json:
        print(dumps(doc))
    else:
        print(format_fit(doc))
        print(f"\noutputs in {out}/ (summary.json, chain.h5, plots)")
    return 0


def _check_writable(folder: Path):
    try:
        folder.mkdir(parents=True, exist_ok=True)
        probe = folder / ".radwalk-write-test"
        probe.write_text("")
        probe.unlink()
    except OSError as exc:
        raise ConfigError(f"output folder {folder} is not writable: {exc.strerror or exc}") from None
