"""Cost of the sampler's convergence checks, whole-chain re-analysis against the running estimate.

    python benchmarks/convergence_checks.py [--steps 20000] [--at 5000 20000] [--chunk 200] [--repeats 3]

One chain of ``--steps`` steps (32 walkers) is sampled once from a sun-like
star's posterior on the default stages (track grid), without stopping.  Then
the checks a run makes after each chunk of ``--chunk`` steps are replayed on
that chain up to each length in ``--at``, both ways, interleaved, best of
``--repeats``:

- ``whole``: :func:`emcee.autocorr.integrated_time` on the whole chain so far
  at every check (the sampler before this change; total cost grows with the
  square of the length);
- ``running``: :class:`radwalk.inference.autocorr.RunningAutocorrTime`
  (the sampler now; total cost grows linearly).

Printed per length: wall and CPU seconds of all the checks of each way, the
ratio whole/running, the running estimate's full passes and steps read, the
largest relative difference of the two taus over all checks, and the sampling
time of that many steps for scale.
"""

from __future__ import annotations

import argparse
import json
import time

import emcee
import numpy as np

from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.autocorr import RunningAutocorrTime
from radwalk.inference.fit import stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import MOVES, find_map, initial_ball
from radwalk.inference.star import Star

WALKERS = 32


def timed(fn, *args, **kwargs):
    w, c = time.perf_counter(), time.process_time()
    out = fn(*args, **kwargs)
    return time.perf_counter() - w, time.process_time() - c, out


def whole(chain, chunk):
    taus = []
    with np.errstate(invalid="ignore", divide="ignore"):
        for n in range(chunk, chain.shape[0] + 1, chunk):
            taus.append(emcee.autocorr.integrated_time(chain[:n], tol=0, quiet=True))
    return np.array(taus)


def running(chain, chunk):
    est = RunningAutocorrTime()
    taus = [est.update(chain[:n]) for n in range(chunk, chain.shape[0] + 1, chunk)]
    return np.array(taus), est


def sample_chain(steps, seed=7):
    cfg = RunConfig(sampler=SamplerConfig(walkers=WALKERS))
    post = Posterior(stages_for(cfg), Star.from_user_units("sun-like", 1.0, 0.02, 1.0, 0.04, 5772, 60).observations(),
                     cfg)
    rng = np.random.default_rng(seed)
    centre, _ = find_map(post, rng, 2)
    p0 = initial_ball(post, centre, rng, WALKERS)
    s = emcee.EnsembleSampler(WALKERS, post.ndim, post, vectorize=True, moves=MOVES())
    s.random_state = np.random.RandomState(seed).get_state()
    wall, cpu, _ = timed(s.run_mcmc, p0, steps, progress=False)
    return s.get_chain(), wall, cpu


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--steps", type=int, default=20000)
    ap.add_argument("--at", type=int, nargs="+", default=[5000, 20000])
    ap.add_argument("--chunk", type=int, default=200)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    chain, s_wall, s_cpu = sample_chain(args.steps)
    out = {"walkers": WALKERS, "chunk": args.chunk, "sampling_wall_s": s_wall, "sampling_cpu_s": s_cpu,
           "sampled_steps": args.steps, "lengths": {}}
    for n in args.at:
        part = chain[:n]
        best = {"whole": (np.inf, np.inf), "running": (np.inf, np.inf)}
        for _ in range(args.repeats):  # interleaved: both ways see the same machine load
            w, c, t_whole = timed(whole, part, args.chunk)
            best["whole"] = (min(best["whole"][0], w), min(best["whole"][1], c))
            w, c, (t_run, est) = timed(running, part, args.chunk)
            best["running"] = (min(best["running"][0], w), min(best["running"][1], c))
        ok = np.isfinite(t_whole)
        out["lengths"][n] = {
            "checks": n // args.chunk,
            "whole_wall_s": best["whole"][0], "whole_cpu_s": best["whole"][1],
            "running_wall_s": best["running"][0], "running_cpu_s": best["running"][1],
            "ratio_wall": best["whole"][0] / best["running"][0], "ratio_cpu": best["whole"][1] / best["running"][1],
            "running_full_passes": est.full_passes, "running_steps_read": est.steps_read,
            "max_rel_diff_tau": float(np.max(np.abs(t_run[ok] - t_whole[ok]) / t_whole[ok])),
            "final_tau": [float(v) for v in t_run[-1]],
            "sampling_wall_s_scaled": s_wall * n / args.steps,
        }
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
