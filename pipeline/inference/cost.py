"""What sampling an opacity law's own parameters costs, measured before a fit starts.

With a fixed opacity law the relation is read off a grid (the textbook
relations' grid, :mod:`radwalk.forward.grid`); with a sampled opacity
parameter every walker of every step has its own law, so every evaluation
solves the relation directly.  :func:`opacity_sampling_cost` times one such
evaluation for the run's walkers and states what the chain will cost.
"""

from __future__ import annotations

import time
import warnings

import numpy as np

from radwalk.host.config import RunConfig


def opacity_sampling_cost(config: RunConfig, stages, names) -> str:
    """One line: the measured cost of a sampler step when the opacity parameters ``names`` are sampled.

    Parameters
    ----------
    config : RunConfig
        Its sampler settings (walkers, max_steps) and priors.
    stages : StageSet
    names : list of str
        The sampled opacity parameters (:func:`radwalk.host.config.refuse_sampled_opacity`).

    Returns
    -------
    str
        CPU and wall seconds of one step (the relation for every walker, each with its own law), per 1000
        steps and at most at ``max_steps``.
    """
    walkers = config.sampler.walkers
    rng = np.random.default_rng(0)
    values = {k: v for k, v in stages.defaults().items()}
    values.update(mass=np.full(walkers, 1.0), X=np.full(walkers, values["X"]), Z=np.full(walkers, values["Z"]))
    for name in names:
        param = stages.param(name)
        prior = config.prior_for(param) or param.default_prior()
        values[name] = prior.sample(rng, walkers)  # walkers differ: no grid, a direct solution each
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a law's range warnings are the fit's business, not the estimate's
        cpu0, wall0 = time.process_time(), time.perf_counter()
        stages.predict(values)
        cpu, wall = time.process_time() - cpu0, time.perf_counter() - wall0
    steps = config.sampler.max_steps
    return (f"sampling {', '.join(names)} of opacity {stages.opacity.name!r}: every step solves the relation "
            f"{stages.relation.name!r} for each of the {walkers} walkers with its own law (no grid); one step "
            f"measured {cpu:.2g} s of CPU ({wall:.2g} s wall), so about {duration(cpu * 1000)} of CPU per 1000 "
            f"steps and at most {duration(cpu * steps)} at max_steps = {steps} (a converged chain stops earlier)")


def duration(seconds: float) -> str:
    """``seconds`` in words: '40 s', '3.5 min', '2.1 h'."""
    if seconds < 90:
        return f"{seconds:.2g} s"
    if seconds < 5400:
        return f"{seconds / 60:.2g} min"
    return f"{seconds / 3600:.2g} h"
