"""Polytropic stellar structure scaled to a mass and radius, with gas + radiation.

A polytrope fixes rho and P from the Lane–Emden solution and the star's M and
R; the temperature then follows from the equation of state of a fully ionised
ideal gas plus black-body radiation,

    P = rho k T / (mu m_u) + a T^4 / 3

(Kippenhahn, Weigert & Weiss 2012, ch. 13 and 19).  Eddington's standard
model instead holds beta = P_gas / P fixed through the star, which makes an
n = 3 polytrope exact (Eddington 1926; Chandrasekhar 1939, ch. VI).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from radwalk import constants as const
from radwalk.errors import ModelError
from radwalk.host.components import Profile
from radwalk.physics import lane_emden
from radwalk.physics.composition import mu as mean_molecular_weight

__all__ = ["temperature_from_pressure", "eddington_constant", "eddington_beta", "polytrope_structure"]

_NEWTON_TOL = 1e-14  # relative step at which the Newton iterations stop
_NEWTON_MAXITER = 60  # both iterations start within a factor 2 (see below); ~6 steps suffice


def temperature_from_pressure(P, rho, mu):
    """Temperature of a gas + radiation mixture of given total pressure and density.

    Solves ``P = rho k T / (mu m_u) + a T^4 / 3`` for T.

    Parameters
    ----------
    P : array_like, dyn/cm^2
        Total pressure (any shape; P = 0 gives T = 0).
    rho : array_like, g/cm^3
        Density (rho = 0 gives pure radiation).
    mu : array_like
        Mean molecular weight; all three broadcast together.

    Returns
    -------
    T : ndarray, K
        Temperature, converged to ~1e-14 relative; NaN where P < 0, rho < 0 or
        mu <= 0 or an input is NaN.
    beta : ndarray
        Gas pressure over total pressure (1 where P = 0).

    Notes
    -----
    Newton's method in y = ln T on g(y) = A e^y + B e^(4y) - P, with
    A = rho k / (mu m_u) and B = a / 3.  g is increasing and convex in y, so
    starting above the root the iterates fall monotonically onto it.  The
    start min(P / A, (3 P / a)^(1/4)) is above the root (each term alone is at
    most P) and within a factor 2 of it (one term is at least P / 2), so a
    handful of steps converge it.
    """
    P, rho, mu = np.broadcast_arrays(
        np.asarray(P, dtype=float), np.asarray(rho, dtype=float), np.asarray(mu, dtype=float)
    )
    T = np.full(P.shape, np.nan)
    beta = np.full(P.shape, np.nan)
    ok = (P >= 0.0) & (rho >= 0.0) & (mu > 0.0)
    zero = ok & (P == 0.0)
    T[zero] = 0.0
    beta[zero] = 1.0
    live = ok & (P > 0.0)
    if not live.any():
        return T, beta

    p = P[live]
    A = rho[live] * const.K_B / (mu[live] * const.M_U)
    B = const.A_RAD / 3.0
    with np.errstate(divide="ignore"):
        ideal = p / A  # inf for rho = 0: radiation only
    y = np.log(np.minimum(ideal, (p / B) ** 0.25))
    for _ in range(_NEWTON_MAXITER):
        t = np.exp(y)
        gas = A * t
        rad = B * t**4
        step = (gas + rad - p) / (gas + 4.0 * rad)
        y = y - step
        if np.max(np.abs(step)) < _NEWTON_TOL:
            break
    t = np.exp(y)
    T[live] = t
    beta[live] = A * t / p
    return T, beta


@lru_cache(maxsize=1)
def eddington_constant() -> float:
    """The constant C in Eddington's quartic 1 - beta = C (M/M_sun)^2 mu^4 beta^4.

    Returns
    -------
    float
        ``C = pi a G^3 M_sun^2 m_u^4 / (48 omega_3^2 k^4)`` ~ 0.00299, with omega_3
        from the n = 3 Lane–Emden solution.

    Notes
    -----
    With P = K rho^(4/3), the mass of an n = 3 polytrope is
    M = 4 pi omega_3 (K / (pi G))^(3/2), independent of R.  Constant beta makes
    K^3 = (k / (mu m_u))^4 3 (1 - beta) / (a beta^4); eliminating K gives the
    quartic.
    """
    omega3 = lane_emden.solve(3.0).omega
    return (
        math.pi * const.A_RAD * const.G**3 * const.M_SUN**2 * const.M_U**4
        / (48.0 * omega3**2 * const.K_B**4)
    )


def eddington_beta(M, mu):
    """Gas-pressure fraction beta of Eddington's standard model.

    Parameters
    ----------
    M : array_like, g
        Stellar mass (positive).
    mu : array_like
        Mean molecular weight (positive); broadcasts with M.

    Returns
    -------
    ndarray
        beta in (0, 1], the root of 1 - beta = C (M/M_sun)^2 mu^4 beta^4.

    Raises
    ------
    ModelError
        If a mass or mean molecular weight is not finite and positive.
    """
    M, mu = np.broadcast_arrays(np.asarray(M, dtype=float), np.asarray(mu, dtype=float))
    bad = ~np.isfinite(M) | ~(M > 0.0)
    if bad.any():
        raise ModelError(f"Eddington's standard model needs positive finite masses, got {M[bad].flat[0]!r} g")
    if not (np.all(np.isfinite(mu)) and np.all(mu > 0.0)):
        raise ModelError("Eddington's standard model needs a positive finite mean molecular weight")
    c = eddington_constant() * (M / const.M_SUN) ** 2 * mu**4
    # f(beta) = c beta^4 + beta - 1 is increasing and convex on [0, 1]; both
    # 1 and c^(-1/4) lie at or above the root (f >= 0 there), so Newton from
    # their minimum falls monotonically onto it without overshooting.
    with np.errstate(divide="ignore"):
        b = np.minimum(1.0, c ** -0.25)
    for _ in range(_NEWTON_MAXITER):
        step = (c * b**4 + b - 1.0) / (4.0 * c * b**3 + 1.0)
        b = b - step
        if np.max(np.abs(step), initial=0.0) < _NEWTON_TOL:
            break
    return b


def _per_sample(name: str, value, k: int) -> np.ndarray:
    a = np.asarray(value, dtype=float)
    if a.ndim > 1 and all(d == 1 for d in a.shape[1:]):
        a = a.reshape(-1)  # [k, 1] lifted to broadcast against a field: one value per sample
    if a.ndim > 1 or (a.ndim == 1 and a.size not in (1, k)):
        raise ModelError(f"{name} must be a scalar or a per-sample array of length {k}, got shape {a.shape}")
    return np.broadcast_to(a.reshape(-1) if a.ndim else a, (k,)).astype(float)


def polytrope_structure(n, M, R, X, Z, beta=None) -> Profile:
    """A polytrope of index n scaled to mass M and radius R.

    Parameters
    ----------
    n : float or array_like [k]
        Polytropic index, 0 <= n < 5 (one per sample, or one for all).
    M : array_like [k], g
        Mass.
    R : array_like [k], cm
        Radius.
    X, Z : array_like [k]
        Hydrogen and metal mass fractions (fix mu of the fully ionised gas).
    beta : array_like [k], optional
        Gas over total pressure, held constant through each star (Eddington's
        standard model).  If omitted, T and beta come from the gas + radiation
        equation of state at every point.

    Returns
    -------
    Profile
        r, m, rho, P, T, beta of shape [k, g] on :data:`radwalk.physics.lane_emden.GRID`:
        rho = rho_c theta^n with rho_c = (rho_c/rho_mean) 3M / (4 pi R^3),
        P = W G M^2 / R^4 theta^(n+1), m = M q, r = s R.

    Raises
    ------
    ConfigError
        If an index is outside [0, 5) or not finite.
    ModelError
        If a mass or radius is not finite and positive, or shapes disagree.
    """
    sizes = [np.size(a) for a in (n, M, R, X, Z) + ((beta,) if beta is not None else ())]
    k = max(sizes)
    n = _per_sample("n", n, k)
    M = _per_sample("M", M, k)
    R = _per_sample("R", R, k)
    X = _per_sample("X", X, k)
    Z = _per_sample("Z", Z, k)
    for name, a in (("mass", M), ("radius", R)):
        bad = ~np.isfinite(a) | ~(a > 0.0)
        if bad.any():
            raise ModelError(f"a polytrope needs a positive finite {name}, got {a[bad][0]!r}")

    theta, q, _xi1, ratio, W, _gc = lane_emden.tables(n)
    col = (slice(None), None)
    rho_c = ratio * 3.0 * M / (4.0 * math.pi * R**3)
    P_c = W * const.G * M**2 / R**4
    # theta > 0 on the whole grid (the surface itself is excluded), but near
    # the surface theta^n of a steep index underflows gently; that is physical.
    with np.errstate(under="ignore"):
        rho = rho_c[col] * theta ** n[col]
        P = P_c[col] * theta ** (n[col] + 1.0)
    mu = mean_molecular_weight(X, Z)
    if beta is None:
        T, b = temperature_from_pressure(P, rho, mu[col])
    else:
        b = np.broadcast_to(_per_sample("beta", beta, k)[col], P.shape).copy()
        with np.errstate(divide="ignore", invalid="ignore"):
            T = b * P * mu[col] * const.M_U / (rho * const.K_B)
    return Profile(
        r=lane_emden.GRID[None, :] * R[col],
        m=M[col] * q,
        rho=rho,
        P=P,
        T=T,
        beta=b,
        M=M,
        R=R,
        X=X,
        Z=Z,
    )
