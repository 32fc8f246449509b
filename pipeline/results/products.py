"""A fitted star's products in memory: what the per-star figures draw (samples, derived quantities, bands).

The fit (radwalk.inference.fit) fills a :class:`FitProducts`; the figures
(radwalk.report.figures) read it without importing the fit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

BAND_PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)  # the rows of every profile band: 95 % and 68 % and the median
# "convective" is 1 where a sample's layer is convective, 0 where radiative: its percentile rows say where the
# layer is convective in more than 97.5, 84, 50, 16 and 2.5 % of the samples (a row is >= 0.5 there).
BAND_FIELDS = ("rho", "T", "kappa", "mean_free_path", "diffusion_time_cumulative", "convective")


@dataclass
class FitProducts:
    """Everything the plots and the report need about one fitted star (in memory)."""

    star: object  # radwalk.inference.star.Star
    opacity: str
    chain: object  # radwalk.inference.sampler.Chain
    param_names: list  # sampled parameters first (as in chain), then those drawn from their priors
    param_labels: list
    param_units: list
    priors: list
    samples: np.ndarray  # [N, ndim] thinned
    derived_rows: np.ndarray  # [nderived] rows of ``samples`` the derived quantities were computed on
    derived: dict  # name -> [N] in output units
    r_rel: np.ndarray  # [g]
    bands: dict  # field -> [5, g] (BAND_FIELDS; a product written before "convective" existed may lack it)
    observed: dict  # name -> (value, err) in R_sun, L_sun, K
