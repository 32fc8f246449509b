"""Monte Carlo photon random walk through a spherically symmetric medium.

A cross-check of the diffusion integral in :mod:`radwalk.physics.transport`, not a
production transport solver: photons start at the centre, fly isotropically
in straight steps whose optical length is drawn from Exp(1), and are counted
when they cross the outer radius.  The step length in space solves
tau = integral kappa rho ds to second order (a midpoint evaluation of
kappa rho), so the walk follows the real density profile.  All photons are
advanced together (vectorised over photons).

Use it on a profile scaled to a modest optical depth (tens to hundreds):
the number of steps grows as tau^2.
"""

from __future__ import annotations

import numpy as np

from radwalk import constants as k


def _isotropic(rng, n):
    mu = rng.uniform(-1.0, 1.0, n)
    phi = rng.uniform(0.0, 2.0 * np.pi, n)
    s = np.sqrt(1.0 - mu**2)
    return np.stack([s * np.cos(phi), s * np.sin(phi), mu], axis=1)


def escape_times(r_grid, krho, n_photons: int, rng: np.random.Generator, max_steps: int = 200_000,
                 speed: float = k.C):
    """Exit times (s) of photons released at the centre of a sphere.

    Parameters
    ----------
    r_grid : ndarray [g], cm
        Radii from 0 to the outer radius R, increasing.
    krho : ndarray [g], 1/cm
        Extinction coefficient kappa * rho on the grid (interpolated linearly).
    n_photons : int
    rng : numpy.random.Generator
    max_steps : int
        Safety bound; photons still inside after it raise RuntimeError.
    speed : float, cm/s
        Photon speed between interactions.

    Returns
    -------
    ndarray [n_photons], s
    """
    r_grid = np.asarray(r_grid, dtype=float)
    krho = np.asarray(krho, dtype=float)
    R = r_grid[-1]
    floor = 1e-12 * krho.max()  # keeps the step finite where the medium thins out
    x = np.zeros((n_photons, 3))
    path = np.zeros(n_photons)
    done = np.zeros(n_photons, dtype=bool)
    live = np.arange(n_photons)
    for _ in range(max_steps):
        if live.size == 0:
            break
        u = _isotropic(rng, live.size)
        tau = rng.exponential(1.0, live.size)
        xl = x[live]
        r0 = np.linalg.norm(xl, axis=1)
        s1 = tau / np.maximum(np.interp(r0, r_grid, krho), floor)
        rm = np.linalg.norm(xl + 0.5 * s1[:, None] * u, axis=1)
        s = tau / np.maximum(np.interp(np.minimum(rm, R), r_grid, krho), floor)
        new = xl + s[:, None] * u
        out = np.linalg.norm(new, axis=1) >= R
        # distance along u to the sphere for those that leave during this step
        b = np.einsum("ij,ij->i", xl, u)
        c = np.einsum("ij,ij->i", xl, xl) - R**2
        to_edge = -b + np.sqrt(np.maximum(b * b - c, 0.0))
        path[live] += np.where(out, to_edge, s)
        x[live] = new
        done[live[out]] = True
        live = live[~out]
    else:
        raise RuntimeError(f"{live.size} photons still inside after {max_steps} steps")
    return path / speed


def diffusion_estimate(r_grid, krho, speed: float = k.C):
    """The diffusion-integral mean exit time (1/c) integral kappa rho r dr, s."""
    y = krho * r_grid
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(r_grid)) / speed)
