"""Sampler cost of the pipeline against bare emcee, measured in one run (issue 3).

Ratios, not absolute times, are what this script is for: both sides run on the
same machine at the same moment, interleaved, best of several repeats.

    python benchmarks/sampler_cost.py [--steps 2000] [--repeats 3]

Prints: the cost of one sampler step (32 walkers, vectorised) for the
pipeline's posterior (homology relation, combined opacity, Gaussian
likelihood) and for a trivial Gaussian log-probability of the same dimension,
their ratio, the cost per walker-evaluation of each log-probability alone, and
the wall time of one converged fit of a sun-like star on one core.
"""

from __future__ import annotations

import argparse
import json
import time

import emcee
import numpy as np

from radwalk.host.config import RunConfig
from radwalk.inference.fit import fit_one, stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import MOVES
from radwalk.inference.star import Star, seed_for

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
    args = ap.parse_args()

    star = Star.from_user_units("bench-sun", 1.0, 0.02, 1.0, 0.05, 5772.0, 60.0)
    cfg = RunConfig()
    post = Posterior(stages_for(cfg), star.observations(), cfg)
    rng = np.random.default_rng(0)
    centre = np.array([1.0, 0.70, 0.015])
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

    t = time.perf_counter()
    summary, _ = fit_one(star, cfg, seed_for(cfg.seed, star.id))
    fit_s = time.perf_counter() - t

    out = {
        "walkers": WALKERS, "ndim": post.ndim, "steps": args.steps,
        "step_cost": rows,
        "per_walker_evaluation_us": {"pipeline": 1e6 * ev_pipe, "trivial_gaussian": 1e6 * ev_bare},
        "converged_fit": {"seconds": fit_s, "steps": summary["sampler"]["steps"],
                          "tau_max": summary["sampler"]["tau_max"], "converged": summary["sampler"]["converged"]},
    }
    for label, r in rows.items():
        print(f"{label:32s} pipeline {r['pipeline_step_us']:8.0f} us/step   bare emcee {r['bare_step_us']:8.0f} "
              f"us/step   ratio {r['ratio']:.2f}")
    print(f"per walker-evaluation: pipeline {1e6 * ev_pipe:.1f} us, trivial Gaussian {1e6 * ev_bare:.2f} us")
    print(f"converged fit of a sun-like star: {fit_s:.1f} s ({summary['sampler']['steps']} steps, "
          f"tau_max {summary['sampler']['tau_max']:.0f}, converged {summary['sampler']['converged']})")
    print(json.dumps(out))


if __name__ == "__main__":
    main()
