"""Cost of drawing one fitted star's figures: CPU and wall time per figure, in one run.

    python benchmarks/figure_cost.py [--repeats 3] [--products FILE]

Fits a sun-like star with the default stages (the track grid) and the default
sampler once, solves its profile bands, then builds and saves each per-star
figure ``--repeats`` times in this process and prints the best CPU and wall
time of each (building the figure and writing its PNG), their sum, and the
one-off costs of the figure step: the profile bands' solved structures and,
where the run draws figures after the fits, rebuilding the star's products
from its stored folder (:mod:`radwalk.run.star_figures`).  The first
repeat of each figure is printed apart: a worker draws each star once, so
the caches of text layout that later repeats hit are only partly warm there.

``--products FILE`` keeps the fitted star's products (a pickle) in FILE and
reuses them on the next call, so that figure code can be compared without
refitting.  The load average (/proc/loadavg) is printed before and after: the machine is shared.

Measured (2 shared cores, load average 2.7 -> 2.0 over the runs; one star's products, the figure code of
before and after the change run alternately, twice each; first draw in the process, CPU s, wall within 1 %):

    figure              before          after           after / before
    corner_parameters   0.55  0.55      0.49  0.52      0.92
    corner_timescales   0.70  0.68      0.55  0.54      0.79
    trace               0.86  0.84      0.50  0.50      0.59
    profile             1.44  1.39      0.86  0.87      0.61
    predictive          0.51  0.52      0.30  0.30      0.58
    all five            4.06  3.97      2.69  2.72      0.67

Changes kept: fixed margins in inches instead of constrained layout (trace, profile, predictive, opacity
comparison; the layout engine measured every text twice per save), plain-text tick labels (no mathtext parse
per label; about 10 % of the five), PNG zlib level 1 (trace -20 %; files 2-7 % larger).  Tried and dropped: a
third of the trace's points (trace -15 %, but visibly thinner walker paths).  One-off costs of the same star in
the run that drew after the fits (load 3.5 -> 2.9): fit 23.7 s CPU (4,600 steps), rebuilding its products from
the folder 0.02 s, the profile bands' 20 solved structures 47 s -- the largest part of a star's figures, left to
the profile model (``band_stars``).

Measured again after the trace gained its log-probability panel (2 shared cores, heavily loaded: load average
7.5 -> 7.0, wall 2-20x CPU, so CPU only; one star's products, before = the figure code above, after = this
one, run alternately twice each, best of 3 CPU s):

    figure              before          after           after / before
    corner_parameters   0.47  0.43      0.44  0.42      0.97
    corner_timescales   0.72  0.61      0.67  0.62      0.97
    trace               0.63  0.59      0.67  0.68      1.11  (one panel more: the log-probability)
    profile             1.06  1.01      0.54  0.54      0.52
    predictive          0.37  0.36      0.36  0.38      1.01
    all five            3.25  3.00      2.68  2.65      0.85   (first draw: 3.71 3.37 -> 3.08 3.04, 0.86)

Changes kept: the profile's log axes tick decades with plain-text labels (10⁻²) and one minor tick per
unlabelled decade instead of eight minor ticks per decade as mathtext (230 Tick objects fewer; profile -48 %);
the walkers of each trace panel as one LineCollection (same drawing cost as one Line2D per walker, fewer
artists to build); plain-text σ, ± and τ.  Tried and dropped: path simplification thresholds (collections are
not simplified; Line2D at 1 px no faster), min/max decimation of the walkers per pixel column (-7 % of the trace
at 3 steps a bucket, visible differences beyond), PNG as RGB instead of RGBA (same encoding time).  Where the
rest goes (cProfile): in the corner plots axes and tick creation (16 axes for four timescales, the upper
triangle hidden but built by corner) and corner's 2-D layers; in the trace the Agg rasterisation of
32 walkers x 4,600 steps per panel (45 %); in every figure text layout and, on a first draw, mathtext parsing
of titles and labels (about 0.5 s of the five; matplotlib caches only 50 parsed strings).
"""

from __future__ import annotations

import argparse
import json
import pickle
import tempfile
import time
from pathlib import Path

from radwalk.host.config import RunConfig
from radwalk.inference.star import Star
from radwalk.report import figures

STAR = ("bench-sun", 1.0, 0.02, 1.0, 0.05, 5772.0, 60.0)


def timed(fn, *args):
    """(result, wall s, CPU s) of one call."""
    t, c = time.perf_counter(), time.process_time()
    out = fn(*args)
    return out, time.perf_counter() - t, time.process_time() - c


def fitted(config: RunConfig, folder: Path):
    """(products of the primary law, one-off costs): the star fitted into ``folder`` and its bands solved."""
    from radwalk.inference.fit import fit_star

    star = Star.from_user_units(*STAR)
    result, wall, cpu = timed(fit_star, star, config, folder, False)
    if result.status == "failed":
        raise SystemExit(f"the fit failed: {result.reason}")
    costs = {"fit": {"wall_s": wall, "cpu_s": cpu, "steps": result.summary["sampler"]["steps"]}}
    try:
        from radwalk.run.star_figures import stored_products
    except ImportError:  # before the figures were drawn after the fits: refit in memory instead
        from radwalk.inference.fit import fit_laws

        products = fit_laws(star, config)[1]
    else:
        products, wall, cpu = timed(stored_products, star, config, folder)
        costs["rebuild_from_folder"] = {"wall_s": wall, "cpu_s": cpu}
    primary = products[config.opacity_names()[0]]
    _, wall, cpu = timed(primary.ensure_bands)
    costs["profile_bands"] = {"wall_s": wall, "cpu_s": cpu}
    return primary, costs


def loadavg() -> str:
    """The 1-, 5- and 15-minute load averages (Linux), or "n/a"."""
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return "n/a"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--products", metavar="FILE", help="pickle of the fitted star's products (made if missing)")
    args = ap.parse_args()

    config = RunConfig()
    costs = {}
    load_before = loadavg()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        if args.products and Path(args.products).is_file():
            products = pickle.loads(Path(args.products).read_bytes())
        else:
            products, costs = fitted(config, tmp / "star")
            if args.products:
                Path(args.products).write_bytes(pickle.dumps(products))
        per_figure = {}
        for kind, builder in figures._star_builders():
            walls, cpus, sizes = [], [], []
            for _ in range(args.repeats):
                path = tmp / f"{kind}.png"
                _, wall, cpu = timed(lambda b=builder, p=path: figures.save_figure(b(products), p))
                walls.append(wall)
                cpus.append(cpu)
                sizes.append(path.stat().st_size)
            per_figure[kind] = {"first_wall_s": walls[0], "first_cpu_s": cpus[0], "best_wall_s": min(walls),
                                "best_cpu_s": min(cpus), "png_bytes": sizes[-1]}
    total_first = sum(f["first_cpu_s"] for f in per_figure.values())
    total_best = sum(f["best_cpu_s"] for f in per_figure.values())
    print(f"load average before {load_before}, after {loadavg()}")
    for name, c in costs.items():
        print(f"{name:22s} {c['wall_s']:7.2f} s wall {c['cpu_s']:7.2f} s CPU")
    print(f"{'figure':22s} {'first wall':>10s} {'first CPU':>10s} {'best wall':>10s} {'best CPU':>10s} {'PNG kB':>7s}")
    for kind, f in per_figure.items():
        print(f"{kind:22s} {f['first_wall_s']:10.3f} {f['first_cpu_s']:10.3f} {f['best_wall_s']:10.3f} "
              f"{f['best_cpu_s']:10.3f} {f['png_bytes'] / 1024:7.0f}")
    print(f"{'all five':22s} {sum(f['first_wall_s'] for f in per_figure.values()):10.3f} {total_first:10.3f} "
          f"{sum(f['best_wall_s'] for f in per_figure.values()):10.3f} {total_best:10.3f}")
    print(json.dumps({"one_off": costs, "per_figure": per_figure, "repeats": args.repeats,
                      "load_average": {"before": load_before, "after": loadavg()}}))


if __name__ == "__main__":
    main()
