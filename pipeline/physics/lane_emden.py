"""Lane–Emden solutions for polytropic indices 0 <= n < 5, on one relative grid.

The Lane–Emden equation

    (1/xi^2) d/dxi (xi^2 dtheta/dxi) = -theta^n,   theta(0) = 1, theta'(0) = 0,

describes a self-gravitating sphere with P = K rho^(1 + 1/n) (Chandrasekhar
1939, ch. IV; Kippenhahn, Weigert & Weiss 2012, ch. 19).  :func:`solve`
integrates it once per index (cached) and samples theta and the mass fraction
on :data:`GRID`; :func:`tables` serves many indices at once, interpolating a
dense index table so that a sampler with a free index never integrates an ODE
inside its loop.

Scalings used by the profile models (M, R the stellar mass and radius):
rho_c = density_ratio * 3M / (4 pi R^3), P_c = W G M^2 / R^4, and the
gravitational energy Omega = -grav_coeff G M^2 / R with grav_coeff = 3/(5 - n).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline

from radwalk.errors import ConfigError, ModelError

__all__ = ["GRID", "LaneEmden", "solve", "tables", "TABLE_NODES", "TABLE_TOP"]


def _make_grid() -> np.ndarray:
    # Uniform in the bulk: the diffusion and mass integrals weight the whole
    # interior evenly, and a uniform step keeps finite differences simple.
    bulk = np.linspace(0.0, 0.95, 177)[:-1]
    # Geometric in depth 1 - s from 0.05 down to 1e-6: a polytrope's
    # temperature falls like (1 - s) and its density like (1 - s)^n, so the
    # optical depth builds up within a tiny outer shell and the photosphere of
    # a real star lies at 1 - s ~ 1e-4 or closer; a uniform grid would put no
    # point there.  The first geometric step (~0.0064) matches the bulk step
    # (~0.0054) so the spacing has no jump.  The exact surface s = 1 is left
    # out because theta, P and T vanish there, and every point must keep T > 0.
    surface = 1.0 - np.geomspace(0.05, 1e-6, 80)
    grid = np.concatenate([bulk, surface])
    grid.setflags(write=False)
    return grid


GRID: np.ndarray = _make_grid()
"""Relative radius s = r/R of every profile point, 256 points from 0 to 1 - 1e-6."""

# Start of the numerical integration; below it the series is exact to ~xi^6 ~ 1e-18.
_XI0 = 1e-3
# Tighter than the usual 1e-12 / 1e-14: this places xi1 to ~1e-14 relative,
# which keeps theta accurate to ~1e-8 relative even at the outermost grid point
# (where theta ~ 1e-7 and an error in xi1 shows up directly).
_RTOL = 1e-13
_ATOL = 1e-16
_XI_MAX = 1e8
# The index table's nodes need less: its cubic interpolation errs by ~1e-7 to
# 5e-6, and these tolerances (xi1 to ~2e-12) cost ~40 % less time to build.
_TABLE_RTOL = 1e-11
_TABLE_ATOL = 1e-14


def _check_index(n) -> float:
    try:
        v = float(n)
    except (TypeError, ValueError):
        raise ConfigError(f"polytropic index must be a number, got {n!r}; allowed: 0 <= n < 5") from None
    if not math.isfinite(v) or not (0.0 <= v < 5.0):
        raise ConfigError(
            f"polytropic index n = {n} is outside the allowed range 0 <= n < 5 "
            "(n = 5 and above have no finite surface)"
        )
    return v


@dataclass(frozen=True, eq=False)
class LaneEmden:
    """The solution of the Lane–Emden equation for one index.

    Attributes
    ----------
    n : float
        Polytropic index.
    xi1 : float
        First zero of theta (the surface), dimensionless.
    dtheta1 : float
        theta'(xi1) (negative).
    omega : float
        -xi1^2 theta'(xi1); the mass M = 4 pi alpha^3 rho_c omega.
    density_ratio : float
        Central over mean density, -xi1 / (3 theta'(xi1)).
    W : float
        Central pressure coefficient 1 / (4 pi (n + 1) theta'(xi1)^2): P_c = W G M^2 / R^4.
    grav_coeff : float
        3 / (5 - n): gravitational energy Omega = -grav_coeff G M^2 / R.
    theta : ndarray [g]
        theta at xi = GRID * xi1 (read-only).
    dtheta : ndarray [g]
        theta'(xi) at the same points (read-only).
    q : ndarray [g]
        Mass fraction m(r)/M = xi^2 theta'(xi) / (xi1^2 theta'(xi1)) (read-only).
    """

    n: float
    xi1: float
    dtheta1: float
    omega: float
    density_ratio: float
    W: float
    grav_coeff: float
    theta: np.ndarray
    dtheta: np.ndarray
    q: np.ndarray


def _rhs(n: float):
    def rhs(xi, y):
        t = y[0]
        dt = y[1]
        # theta is clipped at 0: past the surface theta^n has no meaning, and
        # the step that straddles the zero must not take a negative number to
        # a fractional power.
        return np.array((dt, -(t**n if t > 0.0 else 0.0) - 2.0 * dt / xi))

    return rhs


def _surface(xi, y):
    return y[0]


_surface.terminal = True
_surface.direction = -1


def _clean_mass_fraction(q: np.ndarray) -> np.ndarray:
    # Near a steep polytrope's surface 1 - q falls below rounding: q may come
    # out a hair above 1 or jitter by 1e-16.  Mass inside r cannot decrease, so
    # make it monotone and cap it at 1 (the changes are at rounding level).
    q = np.minimum(np.maximum.accumulate(q, axis=-1), 1.0)
    q[..., 0] = 0.0  # exactly, not -0.0
    return q


def _integrate(n: float, rtol: float, atol: float) -> LaneEmden:
    xi0 = _XI0
    # Series about the centre: theta = 1 - xi^2/6 + n xi^4/120 - ...
    y0 = [1.0 - xi0**2 / 6.0 + n * xi0**4 / 120.0, -xi0 / 3.0 + n * xi0**3 / 30.0]
    sol = solve_ivp(
        _rhs(n), (xi0, _XI_MAX), y0, method="DOP853", rtol=rtol, atol=atol,
        events=_surface, dense_output=True,
    )
    if sol.status != 1 or len(sol.t_events[0]) == 0:
        raise ModelError(
            f"Lane–Emden integration for n = {n} did not reach the surface before "
            f"xi = {_XI_MAX:g}: {sol.message}"
        )
    xi1 = float(sol.t_events[0][0])
    dtheta1 = float(sol.y_events[0][0][1])

    xi = GRID * xi1
    theta = np.empty_like(xi)
    dtheta = np.empty_like(xi)
    inner = xi < xi0
    xs = xi[inner]
    theta[inner] = 1.0 - xs**2 / 6.0 + n * xs**4 / 120.0
    dtheta[inner] = -xs / 3.0 + n * xs**3 / 30.0
    theta[~inner], dtheta[~inner] = sol.sol(xi[~inner])
    q = _clean_mass_fraction(xi**2 * dtheta / (xi1**2 * dtheta1))
    for a in (theta, dtheta, q):
        a.setflags(write=False)
    return LaneEmden(
        n=n,
        xi1=xi1,
        dtheta1=dtheta1,
        omega=-(xi1**2) * dtheta1,
        density_ratio=-xi1 / (3.0 * dtheta1),
        W=1.0 / (4.0 * math.pi * (n + 1.0) * dtheta1**2),
        grav_coeff=3.0 / (5.0 - n),
        theta=theta,
        dtheta=dtheta,
        q=q,
    )


@lru_cache(maxsize=512)
def _solve(n: float) -> LaneEmden:
    return _integrate(n, _RTOL, _ATOL)


def solve(n: float) -> LaneEmden:
    """Lane–Emden solution for index ``n`` (cached per index).

    Parameters
    ----------
    n : float
        Polytropic index, 0 <= n < 5.

    Returns
    -------
    LaneEmden

    Raises
    ------
    ConfigError
        If ``n`` is not a finite number in [0, 5).
    """
    return _solve(_check_index(n))


# ---------------------------------------------------------------------------
# Index table for many indices at once.
#
# Interpolation runs in u = -log(5 - n), not in n: xi1, rho_c/rho_mean and W
# all diverge as n -> 5 roughly like powers of 1/(5 - n), so their logarithms
# are nearly linear in u there and a cubic spline in u stays accurate up to
# n = 4.99, where a spline in n fails by 1e-2 already at n = 4.9.  Nodes are
# every 0.05 in n up to 4.5 and then geometric in 5 - n from 0.5 to 0.01.
# Interpolated are log xi1, log(rho_c/rho_mean), log W, log theta[g] and
# log(q/s^3)[g] (the mean density inside s over the mean density, finite at the
# centre): logs keep the relative error even from the centre to the surface.
# Measured accuracy against exact solves at 400 indices (worst relative error;
# xi1, W and rho_c/rho_mean | theta and q over all grid points):
#   0 < n < 0.3: 6e-7 | 8e-7;   0.3-1: 3e-8 | 4e-8;   1-4: 7e-9 | 9e-8;
#   4-4.99: 9e-8 | 5e-6.
TABLE_TOP = 4.99
TABLE_NODES: np.ndarray = np.concatenate(
    [np.round(np.arange(0.0, 4.5 - 1e-9, 0.05), 10), 5.0 - np.geomspace(0.5, 5.0 - TABLE_TOP, 30)]
)
TABLE_NODES.setflags(write=False)


def _u(n):
    return -np.log(5.0 - n)


@dataclass(frozen=True)
class _IndexTable:
    log_xi1: CubicSpline
    log_ratio: CubicSpline
    log_W: CubicSpline
    log_theta: CubicSpline
    log_mean_density: CubicSpline


@lru_cache(maxsize=1)
def _index_table() -> _IndexTable:
    sols = [_integrate(float(n), _TABLE_RTOL, _TABLE_ATOL) for n in TABLE_NODES]
    u = _u(TABLE_NODES)
    s3 = GRID[1:] ** 3
    mean_density = np.empty((len(sols), GRID.size))
    for i, s in enumerate(sols):
        mean_density[i, 0] = s.density_ratio
        mean_density[i, 1:] = s.q[1:] / s3

    def spline(values):
        return CubicSpline(u, np.log(values), axis=0)

    return _IndexTable(
        log_xi1=spline(np.array([s.xi1 for s in sols])),
        log_ratio=spline(np.array([s.density_ratio for s in sols])),
        log_W=spline(np.array([s.W for s in sols])),
        log_theta=spline(np.array([s.theta for s in sols])),
        log_mean_density=spline(mean_density),
    )


def tables(n) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Lane–Emden quantities for one index per sample.

    Parameters
    ----------
    n : array_like [k]
        Polytropic index of each sample (a scalar counts as k = 1), 0 <= n < 5.

    Returns
    -------
    theta : ndarray [k, g]
        theta on :data:`GRID`.
    q : ndarray [k, g]
        Mass fraction m/M on :data:`GRID`.
    xi1, density_ratio, W, grav_coeff : ndarray [k]
        As in :class:`LaneEmden`.

    Notes
    -----
    If every sample has the same index the exact :func:`solve` is used.
    Otherwise indices up to :data:`TABLE_TOP` are interpolated (cubic spline
    in -log(5 - n) over :data:`TABLE_NODES`, built once on first use, ~1 s;
    relative error below 1e-5, see the module comments) and indices above it
    are solved exactly, once per distinct value.

    Raises
    ------
    ConfigError
        If any index is not finite or lies outside [0, 5).
    """
    n = np.atleast_1d(np.asarray(n, dtype=float))
    if n.ndim != 1:
        raise ConfigError(f"polytropic indices must be a 1-D per-sample array, got shape {n.shape}")
    bad = ~np.isfinite(n) | (n < 0.0) | (n >= 5.0)
    if bad.any():
        _check_index(n[bad][0])
    k = n.size
    grav_coeff = 3.0 / (5.0 - n)
    if k > 0 and np.all(n == n[0]):
        s = _solve(float(n[0]))
        return (
            np.tile(s.theta, (k, 1)),
            np.tile(s.q, (k, 1)),
            np.full(k, s.xi1),
            np.full(k, s.density_ratio),
            np.full(k, s.W),
            grav_coeff,
        )

    theta = np.empty((k, GRID.size))
    q = np.empty((k, GRID.size))
    xi1 = np.empty(k)
    ratio = np.empty(k)
    W = np.empty(k)
    low = n <= TABLE_TOP
    if low.any():
        tab = _index_table()
        u = _u(n[low])
        theta[low] = np.exp(tab.log_theta(u))
        q[low] = _clean_mass_fraction(np.exp(tab.log_mean_density(u)) * GRID**3)
        xi1[low] = np.exp(tab.log_xi1(u))
        ratio[low] = np.exp(tab.log_ratio(u))
        W[low] = np.exp(tab.log_W(u))
    for value in np.unique(n[~low]):
        s = _solve(float(value))
        sel = n == value
        theta[sel] = s.theta
        q[sel] = s.q
        xi1[sel] = s.xi1
        ratio[sel] = s.density_ratio
        W[sel] = s.W
    return theta, q, xi1, ratio, W, grav_coeff
