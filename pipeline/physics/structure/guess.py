"""Starting models for the structure solver: a scaled polytrope or a homologous neighbour.

Newton's method needs a start close enough to the solution.  Two are offered:

* an n = 3 polytrope (Eddington 1926; Chandrasekhar 1939, ch. IV) scaled to
  the mass and a rough radius, with T from the ideal gas + radiation
  equation of state, L(m) shaped like the integral of eps over the
  polytrope and scaled to a rough luminosity; the solver first relaxes it
  with a fully ionised gas (:func:`ionised_gas_state`), then with the real EOS;
* a solved model of a neighbouring mass scaled by homology (Kippenhahn,
  Weigert & Weiss 2012, ch. 20): r ~ M^a, rho ~ M / r^3, T ~ M / r and
  L ~ M^b at every mass fraction (see :func:`homology_start`);
* two solved neighbours extrapolated linearly in ln M, for sequences.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from radwalk import constants as const
from radwalk.errors import ModelError
from radwalk.physics.composition import mu as mean_weight
from radwalk.physics.polytrope import polytrope_structure
from radwalk.physics.structure.atmosphere import photosphere
from radwalk.physics.structure.equations import LN_R, LN_RHO, LN_T, LUM, N_VAR, Physics
from radwalk.physics.structure.mesh import _SURFACE_DEPTH, _SURFACE_WEIGHT, _stretch

__all__ = ["ionised_gas_state", "rough_radius", "rough_luminosity", "polytrope_start", "homology_start",
           "extrapolated_start", "resample"]

_LOW_MASS = 1.3  # M_sun; below it R ~ M^0.85, above R ~ M^0.6
# Depth 1 - q below which the polytrope's own q table has lost its digits;
# deeper the near-surface solution P = G M^2 (1 - q) / (4 pi R^4) is used.
_POLY_OUTER = 1e-5


class IonisedGasState(NamedTuple):
    """EOS fields of a fully ionised ideal gas plus radiation (the fields the solver reads)."""

    P: np.ndarray
    P_gas: np.ndarray
    P_rad: np.ndarray
    u: np.ndarray
    mu: np.ndarray
    chi_rho: np.ndarray
    chi_T: np.ndarray
    delta: np.ndarray
    c_P: np.ndarray
    c_V: np.ndarray
    nabla_ad: np.ndarray
    Gamma_1: np.ndarray


def ionised_gas_state(rho, T, X, Z, radiation: bool = True) -> IonisedGasState:
    """Fully ionised ideal gas plus black-body radiation, for the first stage of a polytrope start only.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like
    radiation : bool
        False leaves the radiation out (a pure ideal gas, for idealised tests).

    Returns
    -------
    IonisedGasState
        P = rho k T / (mu m_u) + a T^4 / 3 with 1/mu = 2X + 3Y/4 + Z/2, and
        its derivatives in the beta form of Kippenhahn, Weigert & Weiss 2012,
        ch. 13: chi_rho = beta, chi_T = 4 - 3 beta,
        c_V = k / (mu m_u) (3/2 + 12 (1 - beta) / beta),
        c_P = c_V + P chi_T^2 / (rho T chi_rho), nabla_ad = P delta / (rho T c_P).

    Notes
    -----
    Not a model of real stellar envelopes (no ionisation, no degeneracy):
    the solver relaxes a polytrope with it first, because its smooth outer
    layers let Newton's method converge from a poor start, and then relaxes
    that model with the real EOS.
    """
    rho, T, X, Z = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (rho, T, X, Z)))
    mu = mean_weight(X, Z)
    p_gas = rho * const.K_B * T / (mu * const.M_U)
    p_rad = const.A_RAD * T**4 / 3.0 if radiation else np.zeros_like(T)
    P = p_gas + p_rad
    beta = p_gas / P
    chi_T = 4.0 - 3.0 * beta
    c_V = const.K_B / (mu * const.M_U) * (1.5 + 12.0 * (1.0 - beta) / beta)
    c_P = c_V + P * chi_T**2 / (rho * T * beta)
    delta = chi_T / beta
    nabla_ad = P * delta / (rho * T * c_P)
    return IonisedGasState(P=P, P_gas=p_gas, P_rad=p_rad, u=1.5 * p_gas / rho + 3.0 * p_rad / rho, mu=mu,
                           chi_rho=beta, chi_T=chi_T, delta=delta, c_P=c_P, c_V=c_V, nabla_ad=nabla_ad,
                           Gamma_1=beta / (1.0 - chi_T * nabla_ad))


def rough_radius(M):
    """Rough ZAMS radius for a starting model only (common practice, no source).

    Parameters
    ----------
    M : float, g

    Returns
    -------
    float, cm
        R_sun (M/M_sun)^0.85 below 1.3 M_sun, continued as M^0.6 above.
    """
    m = M / const.M_SUN
    if m < _LOW_MASS:
        return 0.9 * const.R_SUN * m**0.85
    return 0.9 * const.R_SUN * _LOW_MASS**0.85 * (m / _LOW_MASS) ** 0.6


def rough_luminosity(M):
    """Rough ZAMS luminosity for a starting model only (common practice, no source).

    Parameters
    ----------
    M : float, g

    Returns
    -------
    float, erg/s
        0.7 L_sun (M/M_sun)^4.5 below 1 M_sun, 0.7 L_sun M^4 up to 2 M_sun, then M^3.5.
    """
    m = M / const.M_SUN
    if m < 1.0:
        return 0.7 * const.L_SUN * m**4.5
    if m < 2.0:
        return 0.7 * const.L_SUN * m**4
    return 0.7 * const.L_SUN * 16.0 * (m / 2.0) ** 3.5


def polytrope_start(M, q, X_profile, Z, physics: Physics, *, R=None, L=None):
    """Unknowns of an n = 3 polytrope scaled to M and a rough radius.

    Parameters
    ----------
    M : float, g
    q : ndarray [n]
        Mass fractions of the mesh.
    X_profile : ndarray [n]
    Z : float
    physics : Physics
        Used for eps (the shape of L(m)).
    R, L : float, optional
        Radius (cm) and luminosity (erg/s); default :func:`rough_radius` and
        :func:`rough_luminosity`.

    Returns
    -------
    x : ndarray [n, 4]
        ln r, ln rho, ln T and L / L_scale (r and L of the centre point set to
        placeholders).
    L_scale : float, erg/s
    """
    R = rough_radius(M) if R is None else R
    L = rough_luminosity(M) if L is None else L
    X0 = float(X_profile[-1])
    prof = polytrope_structure(3.0, M, R, X0, Z)
    mp = prof.m[0] / M
    keep = np.concatenate([[True], np.diff(mp) > 0.0]) & (1.0 - mp > _POLY_OUTER)
    qp, rp, rhop, Pp = mp[keep], prof.r[0][keep], prof.rho[0][keep], prof.P[0][keep]
    inner = 1.0 - q > _POLY_OUTER
    coord = np.cbrt(q)  # r ~ q^(1/3) at the centre: interpolate in it
    r = np.empty_like(q)
    rho = np.empty_like(q)
    P = np.empty_like(q)
    r[inner] = np.interp(coord[inner], np.cbrt(qp), rp)
    rho[inner] = np.exp(np.interp(coord[inner], np.cbrt(qp), np.log(rhop)))
    P[inner] = np.exp(np.interp(coord[inner], np.cbrt(qp), np.log(Pp)))
    # Outer layers: the photospheric pressure of the grey atmosphere plus the
    # weight of the column above, P = P_ph + G M^2 (1 - q) / (4 pi R^4), and
    # the polytrope's own P = K rho^(4/3).
    outer = ~inner
    T_eff = (L / (4.0 * math.pi * const.SIGMA_SB * R * R)) ** 0.25
    try:
        P_ph = float(photosphere(const.G * M / R**2, T_eff, X_profile[-1], Z, physics.kappa, physics.eos).P)
    except ModelError:
        P_ph = const.G * M / R**2 / 0.3  # g / kappa with kappa ~ 1/3 cm^2/g if the atmosphere fails
    K = Pp[0] / rhop[0] ** (4.0 / 3.0)
    P[outer] = P_ph + const.G * M * M * (1.0 - q[outer]) / (4.0 * math.pi * R**4)
    rho[outer] = (P[outer] / K) ** 0.75
    # Radii from the mass equation with the guessed densities, so that the
    # start satisfies dr/dm = 1 / (4 pi r^2 rho) exactly at every interval.
    m = q * M
    vol = np.concatenate([[0.0], np.cumsum(0.5 * (1.0 / rho[1:] + 1.0 / rho[:-1]) * np.diff(m))])
    r = np.cbrt(3.0 * vol / (4.0 * math.pi))
    R = r[-1]
    from radwalk.physics.polytrope import temperature_from_pressure

    T, _ = temperature_from_pressure(P, rho, mean_weight(X_profile, Z))
    T = (T**4 + T_eff**4) ** 0.25
    r[0] = r[1]
    eps = physics.nuclear(rho, T, X_profile, Z).eps
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (eps[1:] + eps[:-1]) * np.diff(m))])
    if np.isfinite(cum[-1]) and cum[-1] > 0.0:
        shape = cum / cum[-1]
    else:
        shape = -np.expm1(-q / 0.1) / -np.expm1(-10.0)
    x = np.empty((q.size, N_VAR))
    x[:, LN_R] = np.log(r)
    x[0, LN_R] = np.log(r[1]) - 1.0  # placeholder, not used by the equations
    x[:, LN_RHO] = np.log(rho)
    x[:, LN_T] = np.log(T)
    x[:, LUM] = shape
    x[0, LUM] = 0.0
    return x, L


def resample(q_old, x_old, q_new):
    """Interpolate unknowns from one mass mesh onto another.

    Parameters
    ----------
    q_old : ndarray [n_old]
    x_old : ndarray [n_old, 4]
    q_new : ndarray [n_new]

    Returns
    -------
    ndarray [n_new, 4]
        Linear interpolation in the mesh's stretching coordinate (even in
        q^(2/3) at the centre and in ln(1 - q) at the surface).
    """
    if q_old.shape == q_new.shape and np.array_equal(q_old, q_new):
        return x_old.copy()
    s_old = _stretch(q_old, _SURFACE_WEIGHT, _SURFACE_DEPTH)
    s_new = _stretch(q_new, _SURFACE_WEIGHT, _SURFACE_DEPTH)
    x = np.empty((q_new.size, N_VAR))
    for j in range(N_VAR):
        x[:, j] = np.interp(s_new, s_old[1:] if j == LN_R else s_old, x_old[1:, j] if j == LN_R else x_old[:, j])
    x[0, LN_R] = x[1, LN_R] - 1.0
    x[0, LUM] = 0.0
    return x


def _exponents(m_sun):
    """Rough local ZAMS slopes dlnR/dlnM, dlnL/dlnM (common practice, no source)."""
    if m_sun < _LOW_MASS:
        return 1.0, 5.0
    if m_sun < 3.0:
        return 0.6, 4.2
    if m_sun < 10.0:
        return 0.6, 3.5
    return 0.55, 2.8


def _unknowns(star):
    q_old = star.m / star.M
    x_old = np.empty((q_old.size, N_VAR))
    r = np.where(star.r > 0.0, star.r, star.r[1])
    x_old[:, LN_R] = np.log(r)
    x_old[:, LN_RHO] = np.log(star.rho)
    x_old[:, LN_T] = np.log(star.T)
    x_old[:, LUM] = star.L / star.L_surface
    return q_old, x_old


def homology_start(star, M, q):
    """Unknowns of a solved neighbour scaled by homology to mass M.

    Parameters
    ----------
    star : StarStructure
        Solved model of a nearby mass (any mesh).
    M : float, g
        New mass.
    q : ndarray [n]
        New mesh.

    Returns
    -------
    x : ndarray [n, 4]
    L_scale : float, erg/s

    Notes
    -----
    r ~ M^a, rho ~ M / r^3, T ~ M / r and L ~ M^b at every mass fraction with
    rough ZAMS slopes (a, b) = (1.0, 5.0) below 1.3 M_sun, (0.6, 4.2) to
    3 M_sun, (0.6, 3.5) to 10 M_sun and (0.55, 2.8) above (common practice,
    no source).  Toward the photosphere the temperature factor blends into
    that of T_eff ~ (L / R^2)^(1/4), weighted by ln T between centre and
    surface, since the surface temperature does not follow T ~ M / R.
    """
    f = M / star.M
    a_r, a_l = _exponents(math.sqrt(M * star.M) / const.M_SUN)
    q_old, x_old = _unknowns(star)
    x = resample(q_old, x_old, q)
    lf = math.log(f)
    lnT = x[:, LN_T]
    w = np.clip((lnT[0] - lnT) / (lnT[0] - lnT[-1]), 0.0, 1.0)
    a_t = (1.0 - a_r) * (1.0 - w) + 0.25 * (a_l - 2.0 * a_r) * w
    x[:, LN_R] += a_r * lf
    x[:, LN_RHO] += (1.0 - 3.0 * a_r) * lf
    x[:, LN_T] += a_t * lf
    return x, star.L_surface * f**a_l


def extrapolated_start(older, newer, M, q):
    """Unknowns linearly extrapolated in ln M from two solved models on the same mesh.

    Parameters
    ----------
    older, newer : StarStructure
        Two solved models of different mass (and the same composition), the
        newer one nearer to M.
    M : float, g
    q : ndarray [n]

    Returns
    -------
    x : ndarray [n, 4]
    L_scale : float, erg/s
        Extrapolated surface luminosity; L / L_scale is taken from ``newer``.
    """
    t = math.log(M / newer.M) / math.log(newer.M / older.M)
    q0, x0 = _unknowns(older)
    q1, x1 = _unknowns(newer)
    x0 = resample(q0, x0, q)
    x1 = resample(q1, x1, q)
    x = x1 + t * (x1 - x0)
    x[:, LUM] = x1[:, LUM]
    x[0, LN_R] = x[1, LN_R] - 1.0
    L_scale = newer.L_surface * (newer.L_surface / older.L_surface) ** t
    return x, L_scale
