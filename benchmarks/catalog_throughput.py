"""Catalog throughput and memory, measured in one run, with the fixed costs split out.

    python benchmarks/catalog_throughput.py [--stars 24] [--repeats 2] [--plots] [--memory 500]

Runs the same invented catalog (demo stars repeated under new ids) with the
local pool on 1 and 2 workers and with a Dask LocalCluster on 2 workers,
interleaved (A B C A B C) so that load from elsewhere on the machine falls on
all of them, and prints stars per minute and the ratios 2 workers / 1 worker
and Dask / local, with the CPU time of the run (main process and its workers)
beside the wall time and the load average from /proc/loadavg before and
after each run.

Each run is also split into its phases, from the times at which the run's own
log lines (``radwalk.run``) were emitted:

Before the runs, the pool or cluster alone: started, a no-op task run on
every slot, closed (wall and CPU seconds).

``start``    from the call to the run's first log line: catalog read, config
             check, the pool or cluster started (warm-up included where it
             happens before the first log line);
``first``    first-star latency: from that line to the first star stored,
             and the part of it that is not the star's own fit (``first-fit``:
             worker start-up, imports, grid and kernel load, task transfer);
``steady``   the median wall seconds of one star's fit on its worker;
``tail``     tail idle, worker-seconds: the last star on one worker while the
             others have nothing left (sum over the last ``workers - 1``
             stars of the time from their end to the last star's end);
``writes``   from the last star stored to the call's return (summary tables,
             run.toml, state file).

``--memory N`` also runs an N-star catalog with a minimal sampler and reports
the peak resident memory of the main process and of the largest worker,
against a catalog a tenth the size (flat means the catalog is streamed, never
held with its chains).
"""

from __future__ import annotations

import argparse
import logging
import os
import re
import resource
import statistics
import tempfile
import time
from pathlib import Path

from astropy.table import Table

from radwalk.host.config import SamplerConfig
from radwalk.run.demo import demo_paths
from radwalk.run.orchestrate import LOG, load_run_config, run_catalog

STAR_LINE = re.compile(r"^star .* (ok|not-converged|failed) ([0-9.]+) s")


def make_catalog(n: int, path: Path):
    demo = Table.read(demo_paths()["catalog"])
    good = demo[[not str(i).endswith("24") for i in demo["id"]]]  # leave the giant out
    t = good[[i % len(good) for i in range(n)]]
    t["id"] = [f"bench-{i:05d}" for i in range(n)]
    t.write(path, overwrite=True)


def loadavg() -> str:
    """The 1, 5 and 15 minute load averages (/proc/loadavg; os.getloadavg elsewhere)."""
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return " ".join(f"{x:.2f}" for x in os.getloadavg())


class _Times(logging.Handler):
    """Keeps (perf_counter time, message) of every record of the run's logger."""

    def __init__(self):
        super().__init__(logging.INFO)
        self.records = []

    def emit(self, record):
        self.records.append((time.perf_counter(), record.getMessage()))


def one_run(cat: Path, out: Path, cfg, executor: str, workers: int, plots: bool) -> dict:
    """One catalog run: wall, CPU (this process and its children) and the phases (module docstring)."""
    times = _Times()
    LOG.addHandler(times)
    load0 = loadavg()
    try:
        t0, c0 = time.perf_counter(), os.times()
        outcome = run_catalog(cat, out, cfg, executor=executor, workers=workers, force=True, report=False,
                              plots=plots, quiet=True)
        t1, c1 = time.perf_counter(), os.times()
    finally:
        LOG.removeHandler(times)
    assert outcome.failed == 0, outcome.line()
    first_line = times.records[0][0]
    stars = [(t, float(m.group(2))) for t, msg in times.records if (m := STAR_LINE.match(msg))]
    ends = sorted(t for t, _ in stars)
    last = ends[-1]
    tail = sum(last - t for t in ends[-workers:-1]) if workers > 1 else 0.0
    first_end = min(stars)
    return {
        "wall": t1 - t0, "cpu": sum(c1[:4]) - sum(c0[:4]), "cpu_main": sum(c1[:2]) - sum(c0[:2]),
        "start": first_line - t0, "first": first_end[0] - first_line, "first_fit": first_end[0] - first_line -
        first_end[1], "steady": statistics.median(s for _, s in stars), "tail": tail, "writes": t1 - last,
        "load": f"{load0} -> {loadavg()}", "n": len(stars),
    }


PHASES = ("start", "first", "first_fit", "steady", "tail", "writes")


def executor_start(kind: str, workers: int, cfg) -> tuple[float, float]:
    """Wall and CPU seconds (this process and its children) from starting a pool or cluster to every slot
    having run a task that does nothing, and closing it."""
    from radwalk.run.executors import make_executor

    t0, c0 = time.perf_counter(), os.times()
    ex = make_executor(kind, workers, None, cfg, {})
    try:
        pending = {ex.submit(task=os.getpid) for _ in range(ex.slots)}
        while pending:
            _, pending = ex.wait(pending)
        wall = time.perf_counter() - t0
    finally:
        ex.close()
    return wall, sum(os.times()[:4]) - sum(c0[:4])


def throughput(args, work: Path):
    cat = work / "bench.ecsv"
    make_catalog(args.stars, cat)
    cfg = load_run_config(demo_paths()["config"])
    runs = {("local", 1): [], ("local", 2): [], ("dask", 2): []}
    print(f"{args.stars} stars, {args.repeats} repeat(s); load average before: {loadavg()}")
    for ex, w in runs:
        wall, cpu = executor_start(ex, w, cfg)
        print(f"  {ex:5s} {w}: pool/cluster start to every slot ready {wall:.2f} s wall, {cpu:.2f} s CPU "
              f"(with close); load {loadavg()}", flush=True)
    for _ in range(args.repeats):
        for ex, w in runs:
            r = one_run(cat, work / f"run-{ex}{w}", cfg, ex, w, args.plots)
            runs[(ex, w)].append(r)
            print(f"  {ex:5s} {w}: {60 * args.stars / r['wall']:6.2f} stars/min, wall {r['wall']:.1f} s, CPU "
                  f"{r['cpu']:.1f} s ({r['cpu_main']:.1f} s main); " + ", ".join(
                      f"{k} {r[k]:.2f}" for k in PHASES) + f" s; load {r['load']}", flush=True)
    rate = {k: statistics.mean(60 * args.stars / r["wall"] for r in v) for k, v in runs.items()}
    print("\nmeans over the repeats (seconds; tail in worker-seconds):")
    for (ex, w), v in runs.items():
        cpu = statistics.mean(r["cpu"] for r in v)
        print(f"{ex:5s} {w} worker(s): {rate[(ex, w)]:6.2f} stars/min, {cpu / args.stars:.2f} s CPU per star "
              f"(wall {statistics.mean(r['wall'] for r in v):.1f} s, CPU {cpu:.1f} s); "
              + ", ".join(f"{k} {statistics.mean(r[k] for r in v):.2f}" for k in PHASES))
    print(f"2 workers / 1 worker (local): {rate[('local', 2)] / rate[('local', 1)]:.2f}  (target >= 1.8)")
    print(f"dask / local (2 workers):     {rate[('dask', 2)] / rate[('local', 2)]:.2f}  (target within 0.9-1.1)")
    print(f"load average after: {loadavg()}")


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
