"""What a fresh process spends before its first sample, phase by phase (default stages: the track grid).

    python benchmarks/startup_cost.py [--repeats 5] [--compare-src DIR] [--imports]

Each repeat starts fresh Python processes, one as ``radwalk fit`` (``fit``) and
one as a worker of ``radwalk run`` (``worker``), and times, in order, wall and
CPU seconds of:

``python``      the interpreter alone (``python -c pass``, timed from outside);
``cli_import``  (``fit`` processes only) importing :mod:`radwalk.cli.main`;
``cli_config``  (``fit`` only) its parser and the run configuration of ``radwalk fit``;
``task_import`` what a run worker imports for the per-star task
                (:mod:`radwalk.run.executors`, :mod:`radwalk.inference.fit`);
``registry``    the plugin registry (built-in modules, entry points);
``stages``      the stage set of the default configuration, with the opacity
                law's contract probe;
``first_logp``  the posterior of a sun-like star and its first evaluation on
                32 prior draws (loads the track grid, computes its key).

Two cache states: ``warm`` (the cache folder as every process after the first
finds it) and ``cold`` (an empty cache folder: the first process on a machine;
the shipped grid is still found in the package).  ``--compare-src DIR`` runs
the same phases, interleaved, on another source tree laid out as an
importable ``radwalk`` package in DIR (e.g. main: ``git archive main pipeline
plugins`` with ``pipeline`` renamed ``radwalk`` and ``plugins`` moved into it),
so before and after are measured at the same moment.  ``--imports`` adds,
from ``python -X importtime``, the wall time of the first import of the heavy
packages (cumulative, one process).  Bytecode is written and used as in an
installed package (PYTHONDONTWRITEBYTECODE is removed for the children).
Medians over the repeats; the machine's load average is printed beside them.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

PHASES = {"fit": ("cli_import", "cli_config", "task_import", "registry", "stages", "first_logp"),
          "worker": ("task_import", "registry", "stages", "first_logp")}
HEAVY = ("astropy", "astropy.constants", "scipy.special", "scipy.optimize", "scipy.stats", "scipy.integrate",
         "scipy.interpolate", "scipy.linalg", "h5py", "emcee", "pluggy", "matplotlib", "distributed", "dask",
         "jinja2", "tqdm")


def child(mode):
    """Runs the phases of ``mode`` ("fit" or "worker") in this fresh process and prints them as JSON."""
    out = {}
    clock = [time.perf_counter(), time.process_time()]

    def mark(name):
        w, c = time.perf_counter(), time.process_time()
        out[name] = [w - clock[0], c - clock[1]]
        clock[:] = [w, c]

    if mode == "fit":
        import radwalk.cli.main as cli_main

        mark("cli_import")
        from radwalk.cli.args import config_from_args

        args = cli_main.build_parser().parse_args(["fit", "--radius", "1", "0.02", "--luminosity", "1", "0.04",
                                                   "--teff", "5772", "60", "--no-plots"])
        config_from_args(args)
        mark("cli_config")
    import radwalk.inference.fit as fit
    import radwalk.run.executors  # noqa: F401  (what unpickling a worker's task imports)

    mark("task_import")
    from radwalk.host.config import RunConfig

    cfg = RunConfig()
    fit.registry_for(tuple(cfg.plugins))
    mark("registry")
    stages = fit.stages_for(cfg)
    mark("stages")
    import numpy as np

    from radwalk.inference.posterior import Posterior
    from radwalk.inference.star import Star

    post = Posterior(stages, Star.from_user_units("sun-like", 1.0, 0.02, 1.0, 0.04, 5772, 60).observations(), cfg)
    lp = post(post.sample_prior(np.random.default_rng(1), 32))
    assert np.isfinite(lp).any()
    mark("first_logp")
    from radwalk.physics import lane_emden

    out["profile"] = stages.profile.name
    out["lane_emden_table_built"] = lane_emden._index_table.cache_info().currsize > 0
    out["loaded"] = [m for m in HEAVY if sys.modules.get(m) is not None]
    print(json.dumps(out))


def _env(src, cache):
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["RADWALK_CACHE"] = str(cache)
    env.setdefault("MPLBACKEND", "Agg")
    if src:
        env["PYTHONPATH"] = str(src)
    return env


def _run(cmd, env):
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    w = time.perf_counter()
    res = subprocess.run(cmd, env=env, capture_output=True, text=True, check=True)
    wall = time.perf_counter() - w
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return res, wall, cpu


def run_phases(src, cache, mode):
    res, wall, cpu = _run([sys.executable, __file__, "--child", mode], _env(src, cache))
    out = json.loads(res.stdout.strip().splitlines()[-1])
    out["process_total"] = [wall, cpu]
    return out


def python_alone():
    _, wall, cpu = _run([sys.executable, "-c", "pass"], _env(None, tempfile.gettempdir()))
    return [wall, cpu]


def import_times(src, cache):
    code = "import radwalk.cli.main, radwalk.run.executors, radwalk.inference.fit"
    res = subprocess.run([sys.executable, "-X", "importtime", "-c", code], env=_env(src, cache),
                         capture_output=True, text=True, check=True)
    first = {}
    for line in res.stderr.splitlines():
        m = re.match(r"import time:\s+\d+ \|\s+(\d+) \|\s*(\S+)", line)
        if m and m.group(2) in HEAVY and m.group(2) not in first and int(m.group(1)) > 100:  # >0.1 ms: not a
            # module hidden on purpose (radwalk.inference.sampler imports emcee without scipy.stats)
            first[m.group(2)] = int(m.group(1)) / 1e6
    return first


def _median(rows, key):
    return [statistics.median(r[key][i] for r in rows) for i in (0, 1)]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--child", choices=tuple(PHASES), help=argparse.SUPPRESS)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--compare-src", help="another tree with an importable radwalk package, run interleaved")
    ap.add_argument("--imports", action="store_true", help="first-import wall times from -X importtime")
    args = ap.parse_args()
    if args.child:
        child(args.child)
        return
    trees = {"this": None}
    if args.compare_src:
        trees["compare"] = Path(args.compare_src).resolve()
    warm = Path(os.environ.get("RADWALK_CACHE", Path.home() / ".cache" / "radwalk"))
    rows = {(t, mode, state): [] for t in trees for mode in PHASES for state in ("warm", "cold")}
    alone = []
    for src in trees.values():  # warm-up: bytecode written, the warm cache filled
        run_phases(src, warm, "fit")
    for _ in range(args.repeats):
        alone.append(python_alone())
        for tree, src in trees.items():
            for mode in PHASES:
                rows[(tree, mode, "warm")].append(run_phases(src, warm, mode))
                cold = Path(tempfile.mkdtemp(prefix="radwalk-cold-cache-"))
                try:
                    rows[(tree, mode, "cold")].append(run_phases(src, cold, mode))
                finally:
                    shutil.rmtree(cold, ignore_errors=True)
    report = {"load_average": os.getloadavg(), "repeats": args.repeats,
              "python_alone_wall_cpu_s": [statistics.median(a[i] for a in alone) for i in (0, 1)], "runs": {}}
    for (tree, mode, state), rs in rows.items():
        phases = {p: _median(rs, p) for p in PHASES[mode] + ("process_total",)}
        phases["sum_of_phases"] = [sum(phases[p][i] for p in PHASES[mode]) for i in (0, 1)]
        report["runs"][f"{tree}/{mode}/{state}"] = {
            "wall_cpu_s": phases, "profile": rs[0]["profile"],
            "lane_emden_table_built": rs[0]["lane_emden_table_built"], "loaded": rs[0]["loaded"]}
    if "compare" in trees:
        report["cpu_ratio_compare_over_this"] = {
            f"{mode}/{state}": report["runs"][f"compare/{mode}/{state}"]["wall_cpu_s"]["sum_of_phases"][1]
            / report["runs"][f"this/{mode}/{state}"]["wall_cpu_s"]["sum_of_phases"][1]
            for mode in PHASES for state in ("warm", "cold")}
    if args.imports:
        report["first_import_wall_s"] = {tree: import_times(src, warm) for tree, src in trees.items()}
    report["load_average_after"] = os.getloadavg()
    print(json.dumps(report, indent=1))


if __name__ == "__main__":
    main()
