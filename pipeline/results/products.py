"""A fitted star's products in memory: what the per-star figures draw (samples, derived quantities, bands).

The fit (radwalk.inference.fit) fills a :class:`FitProducts`; the figures
(radwalk.report.figures) read it without importing the fit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

BAND_PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)  # the rows of every profile band: 95 % and 68 % and the median
# "convective" is 1 where a sample's layer is convective, 0 where radiative: its percentile rows say where the
# layer is convective in more than 97.5, 84, 50, 16 and 2.5 % of the samples (a row is >= 0.5 there).
BAND_FIELDS = ("rho", "T", "kappa", "mean_free_path", "diffusion_time_cumulative", "convective")


def profile_bands(r_rel, fields: dict) -> tuple[np.ndarray, dict]:
    """Percentile bands of radial profiles over samples, on one grid in r/R.

    A polytrope's samples share their grid in r/R; a solved star's mesh is in
    mass, so each sample's layers sit at their own r/R, and a band taken
    point by point along the mesh would mix layers at different radii.  Such
    profiles are interpolated (linearly in r/R) onto the median grid first.

    Parameters
    ----------
    r_rel : ndarray [n, g]
        r/R of each sample's layers, increasing outwards.
    fields : dict
        name -> ndarray [n, g], the fields to band.

    Returns
    -------
    grid : ndarray [g]
        The common r/R grid.
    bands : dict
        name -> ndarray [5, g], the :data:`BAND_PERCENTILES` of each field on ``grid``.
    """
    r_rel = np.atleast_2d(np.asarray(r_rel, dtype=float))
    if np.allclose(r_rel, r_rel[0], rtol=0.0, atol=1e-12):
        grid = r_rel[0]
        return grid, {name: np.percentile(f, BAND_PERCENTILES, axis=0) for name, f in fields.items()}
    grid = np.maximum.accumulate(np.median(r_rel, axis=0))  # the median of increasing rows increases
    bands = {}
    for name, f in fields.items():
        f = np.atleast_2d(np.asarray(f, dtype=float))
        on_grid = np.array([np.interp(grid, r_rel[i], f[i]) for i in range(r_rel.shape[0])])
        bands[name] = np.percentile(on_grid, BAND_PERCENTILES, axis=0)
    return grid, bands


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
    bands: dict | None  # field -> [5, g] (BAND_FIELDS); None until ensure_bands() when band_source makes them
    observed: dict  # name -> (value, err) in R_sun, L_sun, K
    band_source: object = None  # callable -> (r_rel, bands, notes): the bands' structures, solved on first use
    band_notes: list = field(default_factory=list)  # validity warnings of those structures
    derived_ok: np.ndarray | None = None  # [nderived] bool: rows that gave a model star (``derived`` is over those)

    def ensure_bands(self) -> None:
        """Solves the profile bands' structures if they were left for the figures (a quick-quantity profile)."""
        if self.bands is None and self.band_source is not None:
            self.r_rel, self.bands, self.band_notes = self.band_source()
            self.band_source = None
