"""The quick run config the run-machinery tests share: the textbook stages and a short sampler.

The stars do not converge with it, which those tests do not need: they check what a run does with its files,
locks, signals and workers, not the fits.
"""


def quick_run_toml(seed: int | None = None, max_steps: int = 200) -> str:
    """Text of a run config (TOML) with the polytrope + homology stages and ``max_steps`` sampler steps."""
    text = f"""\
[stages]
profile = "polytrope"
opacity = "combined"
relation = "homology"
likelihood = "gaussian"

[sampler]
walkers = 16
chunk = 100
max_steps = {max_steps}
derived_samples = 60
optimizer_starts = 1
"""
    return text if seed is None else text + f"\n[run]\nseed = {seed}\n"
