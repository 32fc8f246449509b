"""Catalog throughput and memory, measured in one run.

    python benchmarks/catalog_throughput.py [--stars 24] [--plots] [--memory 500]

Runs the same invented catalog (demo stars repeated under new ids) with the
local pool on 1 and 2 workers and with a Dask LocalCluster on 2 workers,
interleaved (A B C A B C) so that load from elsewhere on the machine falls on
all of them, and prints stars per minute and the ratios 2 workers / 1 worker
and Dask / local, with the CPU time of the workers beside the wall time and
the machine's load average.  ``--memory N`` also runs an N-star catalog with a minimal
sampler and reports the peak resident memory of the main process and of the
largest worker, against a catalog a tenth the size (flat means the catalog is
streamed, never held with its chains).
"""

from __future__ import annotations

import argparse
import os
import resource
import tempfile
import time
from pathlib import Path

from astropy.table import Table

from radwalk.host.config import SamplerConfig
from radwalk.run.demo import demo_paths
from radwalk.run.orchestrate import load_run_config, run_catalog


def make_catalog(n: int, path: Path):
    demo = Table.read(demo_paths()["catalog"])
    good = demo[[not str(i).endswith("24") for i in demo["id"]]]  # leave the giant out
    t = good[[i % len(good) for i in range(n)]]
    t["id"] = [f"bench-{i:05d}" for i in range(n)]
    t.write(path, overwrite=True)


def throughput(args, work: Path):
    cat = work / "bench.ecsv"
    make_catalog(args.stars, cat)
    cfg = load_run_config(demo_paths()["config"])
    rates = {("local", 1): [], ("local", 2): [], ("dask", 2): []}
    cpu = {key: [] for key in rates}
    print(f"load average before: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    for _ in range(args.repeats):
        for ex, w in rates:
            t0, c0 = time.perf_counter(), os.times()
            out = run_catalog(cat, work / f"run-{ex}{w}", cfg, executor=ex, workers=w, force=True,
                              report=False, plots=args.plots, quiet=True)
            c1 = os.times()
            rates[(ex, w)].append(60 * args.stars / (time.perf_counter() - t0))
            # this process and its worker processes (a local pool's and a LocalCluster's are both children)
            cpu[(ex, w)].append(sum(c1[:4]) - sum(c0[:4]))
            assert out.failed == 0, out.line()
    mean = {k: sum(v) / len(v) for k, v in rates.items()}
    for (ex, w), v in rates.items():
        per_star = sum(cpu[(ex, w)]) / len(cpu[(ex, w)]) / args.stars
        print(f"{ex:5s} {w} worker(s): {mean[(ex, w)]:6.2f} stars/min  (runs: {', '.join(f'{x:.2f}' for x in v)}); "
              f"{per_star:.1f} s CPU per star")
    print(f"2 workers / 1 worker (local): {mean[('local', 2)] / mean[('local', 1)]:.2f}  (target >= 1.8)")
    print(f"dask / local (2 workers):     {mean[('dask', 2)] / mean[('local', 2)]:.2f}  (target within 0.9-1.1)")
    print(f"load average after: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")


def memory(n: int, work: Path):
    tiny = SamplerConfig(walkers=8, chunk=20, max_steps=40, derived_samples=10, optimizer_starts=1)
    cfg = load_run_config(demo_paths()["config"]).with_changes(sampler=tiny)
    for size in (n // 10, n):
        cat = work / f"mem{size}.ecsv"
        make_catalog(size, cat)
        t0 = time.perf_counter()
        out = run_catalog(cat, work / f"mem{size}", cfg, workers=2, force=True, report=False, plots=False,
                          quiet=True)
        main_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        kids_mib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        print(f"{size} stars: {out.line()} in {time.perf_counter() - t0:.0f} s; peak RSS main {main_mib:.0f} MiB, "
              f"largest worker {kids_mib:.0f} MiB")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--stars", type=int, default=24)
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--plots", action="store_true", help="include the per-star plots (as a real run does)")
    ap.add_argument("--memory", type=int, default=0, metavar="N", help="also measure memory on N stars")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="radwalk-bench-") as tmp:
        work = Path(tmp)
        throughput(args, work)
        if args.memory:
            memory(args.memory, work)


if __name__ == "__main__":
    main()
