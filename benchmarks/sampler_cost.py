"""Sampler cost of the pipeline against bare emcee, measured in one run (issue 3).

Ratios, not absolute times, are what this script is for: both sides run on the
same machine at the same moment, interleaved, best of several repeats.

    python benchmarks/sampler_cost.py [--stages default|textbook] [--steps 2000] [--repeats 3]

Prints: the cost of one sampler step (32 walkers, vectorised) for the
pipeline's posterior (``default``: the track grid with the combined opacity
and the Gaussian likelihood, sampling mass, Z and age; ``textbook``:
polytrope + homology, sampling mass, X and Z) and for a trivial Gaussian
log-probability of the same dimension, their ratio, the cost per
walker-evaluation of each log-probability alone, and the wall and CPU time of
one converged fit of a sun-like star on one core, without and with its plots.
"""

from __future__ import annotations

import argparse
import json
import tempfile
import time

import emcee
import numpy as np

from radwalk.host.config import RunConfig
from radwalk.inference.fit import fit_star, stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import MOVES
from radwalk.inference.star import Star

WALKERS = 32


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


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--steps", type=int, default=2000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--stages", choices=("default", "textbook"), default="default")
    args = ap.parse_args()

    star = Star.from_user_units("bench-sun", 1.0, 0.02, 1.0, 0.05, 5772.0, 60.0)
    cfg = RunConfig() if args.stages == "default" else RunConfig(stages={"profile": "polytrope",
                                                                         "relation": "homology"})
    post = Posterior(stages_for(cfg), star.observations(), cfg)
    rng = np.random.default_rng(0)
    start = {"mass": 1.0, "X": 0.70, "Z": 0.015, "age": 4.0}
    centre = np.array([start[name] for name in post.names])
    p0 = centre + 1e-3 * rng.standard_normal((WALKERS, post.ndim))
    post(p0)  # builds or loads the relation grid outside the timing
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
    for label, plots in (("without_plots", False), ("with_plots", True)):
        with tempfile.TemporaryDirectory() as folder:
            t, c = time.perf_counter(), time.process_time()
            result = fit_star(star, cfg, outdir=folder, plots=plots)  # seeded by the config's seed and the id
            if result.status == "failed":
                raise SystemExit(f"the fit failed: {result.reason}")
            fits[label] = {"wall_s": time.perf_counter() - t, "cpu_s": time.process_time() - c}
    summary = result.summary

    out = {
        "walkers": WALKERS, "ndim": post.ndim, "steps": args.steps,
        "step_cost": rows,
        "per_walker_evaluation_us": {"pipeline": 1e6 * ev_pipe, "trivial_gaussian": 1e6 * ev_bare},
        "stages": summary["stages"],
        "converged_fit": {**fits, "steps": summary["sampler"]["steps"], "tau_max": summary["sampler"]["tau_max"],
                          "converged": summary["sampler"]["converged"]},
    }
    for label, r in rows.items():
        print(f"{label:32s} pipeline {r['pipeline_step_us']:8.0f} us/step   bare emcee {r['bare_step_us']:8.0f} "
              f"us/step   ratio {r['ratio']:.2f}")
    print(f"per walker-evaluation: pipeline {1e6 * ev_pipe:.1f} us, trivial Gaussian {1e6 * ev_bare:.2f} us")
    print(f"stages: {summary['stages']}")
    for label, f in fits.items():
        print(f"converged fit of a sun-like star, {label.replace('_', ' ')}: {f['wall_s']:.1f} s wall, "
              f"{f['cpu_s']:.1f} s CPU ({summary['sampler']['steps']} steps, tau_max "
              f"{summary['sampler']['tau_max']:.0f}, converged {summary['sampler']['converged']})")
    print(json.dumps(out))


if __name__ == "__main__":
    main()
