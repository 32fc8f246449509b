"""Radial profiles stored in the track grid, and their interpolation at (M, Z, phase).

The scalars of a fitted star come from the track grid for every posterior
sample; its radial structure (density, temperature, opacity, mean free path,
cumulative photon diffusion time, convective layers), which the profile bands
draw, used to be solved anew for a few samples, at seconds each.  The grid's
own tracks already hold every step's solved model, so the builder keeps each
track's profiles at a few phases on one grid in r/R, and a star's profile is
interpolated like its scalars.

Storage (our own layout, in the track-grid file): ``profiles`` [n_mass, n_z,
n_profile_phase, n_field, n_radius] float32, the :data:`FIELDS` in order,
log10 of the cgs value for the logarithmic ones; ``profile_radius``
[n_radius], the r/R of the points.  The radii are r/R = sin(pi s / 2) for s
equally spaced in 0..1: equal steps of 0.04 near the centre, about 6e-4 below
the photosphere, where density and opacity change by decades within a few
per cent of the radius.  Profile phases are equally spaced 0..1.

Between a track's steps a phase's profile is linear in age (of the logarithm
for the logarithmic fields); between tracks it is linear in log M, log Z and
phase.  Linear, not the cubic stencils of the scalars: a profile crosses the
edges of convection zones, where a cubic would ring, and the bands it feeds
show posterior spreads of several per cent.  The convective flag is
interpolated as a number and read as convective where it is at least 0.5.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from radwalk import constants as const

__all__ = ["FIELDS", "Field", "radius_nodes", "track_profiles", "missing_profiles", "interpolate",
           "DEFAULT_PHASES", "DEFAULT_RADII"]

DEFAULT_PHASES = 26
"""Profile phases per track (phase steps of 0.04; the scalars have 51)."""

DEFAULT_RADII = 40
"""Points in r/R per profile."""


@dataclass(frozen=True)
class Field:
    """One stored profile field: name, cgs unit, stored as log10 or not, and what it is."""

    name: str
    unit: str
    log: bool
    description: str


FIELDS = (
    Field("rho", "g/cm^3", True, "density"),
    Field("T", "K", True, "temperature"),
    Field("kappa", "cm^2/g", True, "Rosseland-mean opacity of the grid's law"),
    Field("diffusion_time_cumulative", "s", True, "photon first-passage time from the centre to r, "
          "(1/c) int_0^r kappa rho r' dr' (0 at the centre by definition; the stored centre value is a placeholder)"),
    Field("mass", "", False, "m/M, the mass inside r"),
    Field("convective", "", False, "1 where the layer is convective (Schwarzschild), 0 where radiative"),
)
_NAMES = tuple(f.name for f in FIELDS)
_LOG = np.array([f.log for f in FIELDS])
_T_CUM = _NAMES.index("diffusion_time_cumulative")


def radius_nodes(n: int = DEFAULT_RADII) -> np.ndarray:
    """r/R of the stored profile points, [n]: sin(pi s / 2), s equally spaced 0..1 (denser toward the surface)."""
    return np.sin(0.5 * np.pi * np.linspace(0.0, 1.0, int(n)))


def _model_profile(star, x: np.ndarray) -> np.ndarray:
    """One solved model's fields at r/R = x, [n_field, n_radius], stored form (log10 where FIELDS says)."""
    r = np.asarray(star.r, dtype=float)
    rr = r / star.R
    krho = star.kappa * star.rho
    t_cum = np.zeros_like(r)
    t_cum[1:] = np.cumsum(0.5 * (krho[1:] * r[1:] + krho[:-1] * r[:-1]) * np.diff(r)) / const.C
    mesh = {"rho": np.log10(star.rho), "T": np.log10(star.T), "kappa": np.log10(star.kappa),
            "diffusion_time_cumulative": np.log10(np.maximum(t_cum, 1e-300)), "mass": star.m / star.M,
            "convective": np.asarray(star.convective, dtype=float)}
    out = np.array([np.interp(x, rr, mesh[name]) for name in _NAMES])
    # The centre's first-passage time is 0, whose log is not finite: keep a finite placeholder (the next point's).
    out[_T_CUM, 0] = out[_T_CUM, 1]
    return out


def missing_profiles(n_phase: int, n_radius: int) -> np.ndarray:
    """The profiles of a failed track: NaN, [n_phase, n_field, n_radius] float32."""
    return np.full((int(n_phase), len(FIELDS), int(n_radius)), np.nan, dtype=np.float32)


def track_profiles(track, n_phase: int = DEFAULT_PHASES, n_radius: int = DEFAULT_RADII,
                   X_end: float | None = None) -> np.ndarray:
    """A track's profiles at equally spaced phases age / t_MS, [n_phase, n_field, n_radius] float32.

    Parameters
    ----------
    track : radwalk.physics.structure.evolution.Track
        With its solved models.
    n_phase, n_radius : int
    X_end : float, optional
        Central hydrogen fraction ending the main sequence (the track's default if None).

    Returns
    -------
    ndarray [n_phase, n_field, n_radius], float32
        Each phase's profile linear in age between the two steps around it (of the stored
        form); NaN when the track did not reach the end of the main sequence.
    """
    life = track.main_sequence_lifetime() if X_end is None else track.main_sequence_lifetime(X_end)
    if not (math.isfinite(life) and life > 0.0) or len(track.models) < 2:
        return missing_profiles(n_phase, n_radius)
    x = radius_nodes(n_radius)
    steps = np.array([_model_profile(s, x) for s in track.models])  # [n_steps, n_field, n_radius]
    age = np.asarray(track.age, dtype=float)
    ages = np.minimum(np.linspace(0.0, 1.0, int(n_phase)) * life, age[-1])
    k = np.clip(np.searchsorted(age, ages, side="right") - 1, 0, age.size - 2)
    w = np.clip((ages - age[k]) / (age[k + 1] - age[k]), 0.0, 1.0)[:, None, None]
    return ((1.0 - w) * steps[k] + w * steps[k + 1]).astype(np.float32)


def _bracket(nodes: np.ndarray, x: np.ndarray):
    """Lower node index and linear weight of x on increasing nodes, [n] each (x clipped to the axis)."""
    if nodes.size == 1:
        return np.zeros(x.shape, dtype=np.intp), np.zeros(x.shape)
    i = np.clip(np.searchsorted(nodes, x, side="right") - 1, 0, nodes.size - 2)
    f = np.clip((x - nodes[i]) / (nodes[i + 1] - nodes[i]), 0.0, 1.0)
    return i, f


def interpolate(table: np.ndarray, log_mass: np.ndarray, log_z: np.ndarray, lm, lz, phase) -> dict:
    """Profiles at (log M, log Z, phase), linear in each; cgs.

    Parameters
    ----------
    table : ndarray [n_mass, n_z, n_phase, n_field, n_radius]
        Stored profiles (:func:`track_profiles` per track).
    log_mass, log_z : ndarray [n_mass], [n_z]
        The grid's axes (log10 M/M_sun, log10 Z).
    lm, lz, phase : ndarray [n]
        The samples' log10 M/M_sun, log10 Z and phase age / t_MS (inside the grid: the caller
        masks samples outside).

    Returns
    -------
    dict of str -> ndarray [n, n_radius]
        Every field of :data:`FIELDS` in cgs (the cumulative diffusion time 0 at the centre),
        ``convective`` as 0/1, and ``mean_free_path`` = 1/(kappa rho), cm.
    """
    nm, nz, npp = table.shape[:3]
    i, fi = _bracket(log_mass, np.asarray(lm, dtype=float))
    j, fj = _bracket(log_z, np.asarray(lz, dtype=float))
    p, fp = _bracket(np.linspace(0.0, 1.0, npp), np.asarray(phase, dtype=float))
    out = 0.0
    for di, wi in ((0, 1.0 - fi), (1, fi)):
        for dj, wj in ((0, 1.0 - fj), (1, fj)):
            for dp, wp in ((0, 1.0 - fp), (1, fp)):
                w = (wi * wj * wp)[:, None, None]
                corner = table[np.minimum(i + di, nm - 1), np.minimum(j + dj, nz - 1), np.minimum(p + dp, npp - 1)]
                # A zero weight must not let a failed (NaN) neighbour spoil the sample.
                out = out + np.where(w > 0.0, w * corner, 0.0)
    vals = np.where(_LOG[None, :, None], 10.0 ** out, out)
    fields = {name: vals[:, k] for k, name in enumerate(_NAMES)}
    fields["diffusion_time_cumulative"][:, 0] = 0.0
    conv = fields["convective"]
    fields["convective"] = np.where(np.isnan(conv), np.nan, (conv >= 0.5).astype(float))
    with np.errstate(divide="ignore", over="ignore"):
        fields["mean_free_path"] = 1.0 / (fields["kappa"] * fields["rho"])
    return fields
