"""Sampler and fit cost of the pipeline against bare emcee, measured in one run.

Ratios, not absolute times, are what this script is for: both sides run on the
same machine at the same moment, interleaved, best of several repeats.

    python benchmarks/sampler_cost.py [--stages default|textbook] [--steps 2000] [--repeats 3]

Prints:

* the cost of one sampler step (32 walkers, vectorised) for the pipeline's
  posterior (``default``: the track grid with the combined opacity and the
  Gaussian likelihood, sampling mass, Z and age, on the fused path of
  :mod:`radwalk.inference.fused`; ``textbook``: polytrope + homology,
  sampling mass, X and Z) and for a trivial Gaussian log-probability of the
  same dimension, with the same moves, and their ratio;
* the cost per walker-evaluation of each log-probability alone;
* one converged fit of a sun-like star in a fresh process (as ``radwalk fit``
  runs it), without and with its plots, split into phases -- imports, the
  optimizer (with the walker ball and the compiled kernel's load from numba's
  cache), sampling, convergence checks, chain
  writes, derived quantities (with the reachability check, the
  posterior-predictive check and the profile bands), plots,
  summary writes, the rest -- wall and CPU time, and the total as a multiple
  of the bare-emcee floor: a fresh process that imports emcee and runs the
  trivial Gaussian for the fit's number of steps with the same walkers and moves.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

import emcee
import numpy as np

# radwalk is imported inside the functions: the fresh child processes measure its import as a phase, and the
# bare-emcee process never imports it.

WALKERS = 32


def bare_moves():
    """The pipeline's moves (radwalk.inference.sampler.MOVES), built without importing radwalk."""
    return [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]

# Where each phase of a fit is spent: (label, module, attribute); the functions are wrapped with a clock in the
# child process only.  Time inside a nested wrapped call counts for the inner phase alone.
PHASES = (
    ("optimizer", "radwalk.inference.sampler", "find_map"),
    ("optimizer", "radwalk.inference.sampler", "initial_ball"),
    ("sampling", "emcee.ensemble", "EnsembleSampler.run_mcmc"),
    ("convergence checks", "radwalk.inference.autocorr", "RunningAutocorrTime.update"),
    ("chain writes", "radwalk.results.chain", "ChainFile.append"),
    ("derived quantities", "radwalk.inference.fit", "derive"),
    ("derived quantities", "radwalk.inference.fit", "check_reachable"),
    ("derived quantities", "radwalk.inference.fit", "ppc_pvalue"),
    ("plots", "radwalk.report.figures", "write_star_plots"),
    ("summary writes", "radwalk.inference.fit", "write_json"),
)


def trivial(theta):
    return -0.5 * np.sum(theta**2, axis=1)


def step_cost(logp, p0, steps, moves):
    s = emcee.EnsembleSampler(WALKERS, p0.shape[1], logp, vectorize=True, moves=moves)
    s.random_state = np.random.RandomState(1).get_state()
    t = time.perf_counter()
    s.run_mcmc(p0, steps, progress=False)
    return (time.perf_counter() - t) / steps


def eval_cost(logp, p0, calls=2000):
    half = p0[: WALKERS // 2]
    t = time.perf_counter()
    for _ in range(calls):
        logp(half)
    return (time.perf_counter() - t) / (calls * half.shape[0])


def _star():
    from radwalk.inference.star import Star

    return Star.from_user_units("bench-sun", 1.0, 0.02, 1.0, 0.05, 5772.0, 60.0)


def _config(stages):
    from radwalk.host.config import RunConfig

    return RunConfig() if stages == "default" else RunConfig(stages={"profile": "polytrope", "relation": "homology"})


class _Clock:
    """Exclusive wall and CPU time per phase label, over wrapped functions that may nest."""

    def __init__(self):
        self.wall, self.cpu, self.stack = {}, {}, []

    def wrap(self, label, fn):
        def timed(*args, **kwargs):
            start = (time.perf_counter(), time.process_time())
            self.stack.append([0.0, 0.0])  # time spent in nested wrapped calls
            try:
                return fn(*args, **kwargs)
            finally:
                inner_w, inner_c = self.stack.pop()
                w, c = time.perf_counter() - start[0], time.process_time() - start[1]
                self.wall[label] = self.wall.get(label, 0.0) + w - inner_w
                self.cpu[label] = self.cpu.get(label, 0.0) + c - inner_c
                if self.stack:
                    self.stack[-1][0] += w
                    self.stack[-1][1] += c
        return timed


def child_fit(stages: str, plots: bool):
    """One fit in this (fresh) process, with its phases; prints JSON."""
    import importlib

    t_wall, t_cpu = time.perf_counter(), time.process_time()
    # numba, which the fused log-probability's kernel needs, is imported on the first evaluation (a fit off the
    # fused path never pays for it); here it counts as an import, as emcee's own import is outside the floor.
    import radwalk.inference._fused_kernel  # noqa: F401
    import radwalk.inference.fit
    import radwalk.report.figures  # noqa: F401 - the import is a measured phase

    imports = (time.perf_counter() - t_wall, time.process_time() - t_cpu)
    clock = _Clock()
    for label, module, attr in PHASES:
        owner = importlib.import_module(module)
        *path, name = attr.split(".")
        for part in path:
            owner = getattr(owner, part)
        setattr(owner, name, clock.wrap(label, getattr(owner, name)))
    with tempfile.TemporaryDirectory() as folder:
        w0, c0 = time.perf_counter(), time.process_time()
        result = radwalk.inference.fit.fit_star(_star(), _config(stages), outdir=folder, plots=plots)
        total = (time.perf_counter() - w0, time.process_time() - c0)
    if result.status == "failed":
        raise SystemExit(f"the fit failed: {result.reason}")
    phases = {"imports": {"wall_s": imports[0], "cpu_s": imports[1]}}
    for label in dict.fromkeys(label for label, _, _ in PHASES):
        phases[label] = {"wall_s": clock.wall.get(label, 0.0), "cpu_s": clock.cpu.get(label, 0.0)}
    phases["rest"] = {"wall_s": total[0] - sum(clock.wall.values()), "cpu_s": total[1] - sum(clock.cpu.values())}
    sampler = result.summary["sampler"]
    print(json.dumps({"phases": phases, "fit_wall_s": total[0], "fit_cpu_s": total[1],
                      "steps": sampler["steps"], "converged": sampler["converged"], "tau_max": sampler["tau_max"],
                      "stages": result.summary["stages"]}))


def child_floor(steps: int, ndim: int):
    """Bare emcee in this (fresh) process: import, then the trivial Gaussian for ``steps`` steps; prints JSON."""
    w0, c0 = time.perf_counter(), time.process_time()
    s = emcee.EnsembleSampler(WALKERS, ndim, trivial, vectorize=True, moves=bare_moves())
    s.random_state = np.random.RandomState(1).get_state()
    s.run_mcmc(np.random.default_rng(0).standard_normal((WALKERS, ndim)), steps, progress=False)
    print(json.dumps({"wall_s": time.perf_counter() - w0, "cpu_s": time.process_time() - c0}))


def _child(*args):
    """Runs this script in a fresh process; returns its JSON line and its whole wall and CPU time (with imports)."""
    env = dict(os.environ, MPLBACKEND="Agg")
    t = time.perf_counter()
    start = os.times()
    out = subprocess.run([sys.executable, __file__, *args], capture_output=True, text=True, env=env, check=True)
    end = os.times()
    res = json.loads(out.stdout.strip().splitlines()[-1])
    res["process_wall_s"] = time.perf_counter() - t
    res["process_cpu_s"] = (end.children_user - start.children_user) + (end.children_system - start.children_system)
    return res


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--steps", type=int, default=2000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--stages", choices=("default", "textbook"), default="default")
    ap.add_argument("--child", choices=("fit", "fit-plots", "floor"), help=argparse.SUPPRESS)
    ap.add_argument("--child-steps", type=int, default=0, help=argparse.SUPPRESS)
    ap.add_argument("--child-ndim", type=int, default=0, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child == "floor":
        return child_floor(args.child_steps, args.child_ndim)
    if args.child:
        return child_fit(args.stages, args.child == "fit-plots")

    from radwalk.inference.fit import stages_for
    from radwalk.inference.posterior import Posterior
    from radwalk.inference.sampler import MOVES

    assert [(type(m), w) for m, w in MOVES()] == [(type(m), w) for m, w in bare_moves()]
    cfg = _config(args.stages)
    post = Posterior(stages_for(cfg), _star().observations(), cfg)
    rng = np.random.default_rng(0)
    start = {"mass": 1.0, "X": 0.70, "Z": 0.015, "age": 4.0}
    centre = np.array([start[name] for name in post.names])
    p0 = centre + 1e-3 * rng.standard_normal((WALKERS, post.ndim))
    post(p0)  # builds or loads the relation grid (and the fused path) outside the timing
    g0 = rng.standard_normal((WALKERS, post.ndim))

    rows = {}
    for label, moves in (("pipeline moves (DE + snooker)", MOVES()), ("emcee default stretch", None)):
        pipe, bare = [], []
        for _ in range(args.repeats):
            pipe.append(step_cost(post, p0, args.steps, moves))
            bare.append(step_cost(trivial, g0, args.steps, moves))
        rows[label] = {"pipeline_step_us": 1e6 * min(pipe), "bare_step_us": 1e6 * min(bare),
                       "ratio": min(pipe) / min(bare)}
    ev_pipe = min(eval_cost(post, p0) for _ in range(args.repeats))
    ev_bare = min(eval_cost(trivial, g0) for _ in range(args.repeats))

    fits = {}
    for label, child in (("without_plots", "fit"), ("with_plots", "fit-plots")):
        fit = _child("--child", child, "--stages", args.stages)
        floor = _child("--child", "floor", "--child-steps", str(fit["steps"]), "--child-ndim", str(post.ndim))
        fit["floor"] = floor
        fit["ratio_in_process"] = fit["fit_wall_s"] / floor["wall_s"]
        fit["ratio_fresh_process"] = fit["process_wall_s"] / floor["process_wall_s"]
        fits[label] = fit

    out = {"walkers": WALKERS, "ndim": post.ndim, "steps": args.steps, "step_cost": rows,
           "per_walker_evaluation_us": {"pipeline": 1e6 * ev_pipe, "trivial_gaussian": 1e6 * ev_bare},
           "fused": post.fused, "converged_fit": fits, "load_average": os.getloadavg()}
    print(f"load average (1, 5, 15 min): {', '.join(f'{x:.2f}' for x in os.getloadavg())}; "
          f"fused path: {post.fused}")
    for label, r in rows.items():
        print(f"{label:32s} pipeline {r['pipeline_step_us']:8.0f} us/step   bare emcee {r['bare_step_us']:8.0f} "
              f"us/step   ratio {r['ratio']:.2f}")
    print(f"per walker-evaluation: pipeline {1e6 * ev_pipe:.2f} us, trivial Gaussian {1e6 * ev_bare:.2f} us")
    for label, fit in fits.items():
        print(f"\nconverged fit of a sun-like star, {label.replace('_', ' ')} ({fit['steps']} steps, tau_max "
              f"{fit['tau_max']:.0f}, converged {fit['converged']}; stages {fit['stages']}):")
        for phase, t in fit["phases"].items():
            print(f"  {phase:20s} {t['wall_s']:7.2f} s wall {t['cpu_s']:7.2f} s CPU")
        fl = fit["floor"]
        print(f"  fit (after imports)  {fit['fit_wall_s']:7.2f} s wall {fit['fit_cpu_s']:7.2f} s CPU   bare-emcee "
              f"floor {fl['wall_s']:.2f} s wall {fl['cpu_s']:.2f} s CPU   ratio {fit['ratio_in_process']:.2f}")
        print(f"  whole process        {fit['process_wall_s']:7.2f} s wall {fit['process_cpu_s']:7.2f} s CPU   "
              f"bare-emcee process {fl['process_wall_s']:.2f} s wall {fl['process_cpu_s']:.2f} s CPU   "
              f"ratio {fit['ratio_fresh_process']:.2f}")
    print(json.dumps(out))


if __name__ == "__main__":
    main()
