"""Difference equations of stellar structure on a mass mesh.

The four structure equations in the mass coordinate m (Kippenhahn, Weigert &
Weiss 2012, *Stellar Structure and Evolution*, 2nd ed., ch. 9-10; Hansen,
Kawaler & Trimble 2004, ch. 7):

    dr/dm = 1 / (4 pi r^2 rho)             (mass conservation)
    dP/dm = -G m / (4 pi r^4)              (hydrostatic equilibrium)
    dL/dm = eps                            (energy; eps_extra reserved for -T ds/dt)
    dlnT/dlnP = nabla                      (energy transport, radiative or MLT)

Unknowns at every mesh point k: ln r, ln rho, ln T and l = L / L_scale.  With
rho as a variable the pressure is an explicit EOS call.  Each mesh interval
[k, k+1] gives four residuals that use only its two end points (trapezoid
averages), so the Jacobian is block-bidiagonal:

    r_{k+1}^3 - r_k^3 = (3 / 4 pi) dm <1/rho>                 exact for uniform density
    P_{k+1} - P_k = -(3 G / 8 pi) <(m^(1/3) / r)^4> d(m^(2/3))
    ln T_{k+1} - ln T_k = <nabla> (ln P_{k+1} - ln P_k)
    l_{k+1} - l_k = dm <eps> / L_scale

The pressure equation is written in m^(2/3), in which -G m / (4 pi r^4)
d m / d(m^(2/3)) = -(3G / 8 pi) (m^(1/3) / r)^4 stays finite at the centre
(the limit is (4 pi rho_c / 3)^(4/3)), so the central interval needs no
special series: a uniform-density centre is integrated exactly, and near
the surface, where r and m hardly change, the pressure difference is exact
too.  At the centre point r = 0, L = 0 exactly; its ln r and l slots are
unused and fixed by two trivial equations, and L/m there is its limit eps_c.

Boundary conditions at the photosphere (m = M): T = T_eff with
L = 4 pi R^2 sigma T_eff^4, and P = P_ph(g, T_eff) of the Eddington grey
atmosphere (:mod:`.atmosphere`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from radwalk.constants import SIGMA_SB, G
from radwalk.physics.structure.atmosphere import photosphere
from radwalk.physics.structure.convection import mlt_gradient, radiative_gradient

__all__ = ["Physics", "PointState", "point_state", "residuals", "N_VAR", "LN_R", "LN_RHO", "LN_T", "LUM"]

N_VAR = 4
LN_R, LN_RHO, LN_T, LUM = range(N_VAR)


@dataclass(frozen=True)
class Physics:
    """The material laws the equations use (all broadcasting, cgs).

    Attributes
    ----------
    eos : callable
        ``eos(rho, T, X, Z)`` -> object with P, u, mu, chi_rho, chi_T, delta,
        c_P, nabla_ad, Gamma_1 (the EosState of :mod:`.eos`).
    nuclear : callable
        ``nuclear(rho, T, X, Z)`` -> object with ``eps`` in erg/(g s).
    kappa : callable
        ``kappa(rho, T, X, Z)`` in cm^2/g.
    alpha : float
        Mixing-length parameter.
    """

    eos: Callable
    nuclear: Callable
    kappa: Callable
    alpha: float


class PointState(NamedTuple):
    """Quantities at the mesh points of one or more models, arrays [k, n]."""

    r: np.ndarray
    rho: np.ndarray
    T: np.ndarray
    L: np.ndarray
    P: np.ndarray
    eps: np.ndarray
    kappa: np.ndarray
    nabla: np.ndarray
    nabla_rad: np.ndarray
    nabla_ad: np.ndarray
    convective: np.ndarray
    v_conv: np.ndarray
    conv_flux_fraction: np.ndarray
    g: np.ndarray
    eos: object
    m_third_over_r: np.ndarray


def point_state(x, m, X, Z, L_scale, physics: Physics, eps_extra=None) -> PointState:
    """Evaluate the material laws and gradients at every mesh point.

    Parameters
    ----------
    x : ndarray [k, n, 4]
        Unknowns ln r (cm), ln rho (g/cm^3), ln T (K), L / L_scale of k models.
    m : ndarray [n], g
        Enclosed mass at the mesh points; m[0] = 0 is the centre.
    X : ndarray [n]
        Hydrogen mass fraction at the points.
    Z : float
        Metal mass fraction.
    L_scale : float, erg/s
        Luminosity unit of the fourth unknown.
    physics : Physics
    eps_extra : ndarray [n], erg/(g s), optional
        Energy source added to the nuclear one (for evolution: -T ds/dt).

    Returns
    -------
    PointState
    """
    rho = np.exp(x[..., LN_RHO])
    T = np.exp(x[..., LN_T])
    r = np.exp(x[..., LN_R])
    r[..., 0] = 0.0
    L = x[..., LUM] * L_scale
    L[..., 0] = 0.0
    st = physics.eos(rho, T, X, Z)
    kap = physics.kappa(rho, T, X, Z)
    eps = physics.nuclear(rho, T, X, Z).eps
    if eps_extra is not None:
        eps = eps + eps_extra
    m_safe = np.where(m > 0.0, m, 1.0)
    L_over_m = np.where(m > 0.0, L / m_safe, eps)  # L/m -> eps_c at the centre
    nabla_rad = radiative_gradient(kap, L_over_m, st.P, T)
    # m^(1/3) / r: at the centre the limit (4 pi rho_c / 3)^(1/3).
    r_safe = np.where(m > 0.0, r, 1.0)
    mr = np.where(m > 0.0, np.cbrt(m) / r_safe, np.cbrt(4.0 * np.pi * rho / 3.0))
    g = G * np.cbrt(m) * mr**2 * (m > 0.0)  # G m / r^2, exactly 0 at the centre
    conv = mlt_gradient(nabla_rad, st.nabla_ad, T=T, rho=rho, P=st.P, kappa=kap, c_P=st.c_P,
                        delta=st.delta, g=g, alpha=physics.alpha)
    return PointState(r=r, rho=rho, T=T, L=L, P=st.P, eps=eps, kappa=kap, nabla=conv.nabla,
                      nabla_rad=nabla_rad, nabla_ad=st.nabla_ad, convective=conv.convective,
                      v_conv=conv.v_conv, conv_flux_fraction=conv.conv_flux_fraction, g=g, eos=st,
                      m_third_over_r=mr)


def residuals(x, m, X, Z, L_scale, physics: Physics, centre_r, eps_extra=None, state=None, cache=None):
    """Residuals of the difference equations and boundary conditions.

    Parameters
    ----------
    x : ndarray [k, n, 4]
        Unknowns of k models.
    m, X, Z, L_scale, physics, eps_extra
        As in :func:`point_state`.
    centre_r : float
        Value the unused ln r slot of the centre point is pinned to.
    state : PointState, optional
        Already evaluated point quantities of ``x``.
    cache : dict, optional
        Keeps the atmosphere of model 0 between calls as a warm start.

    Returns
    -------
    F : ndarray [k, 4 n]
        Dimensionless residuals in the order: 2 centre conditions, 4 per
        interval (radius, pressure, temperature, luminosity), 2 photospheric
        conditions.  Row 2 + 4 i + e belongs to interval i.
    state : PointState
    """
    s = point_state(x, m, X, Z, L_scale, physics, eps_extra) if state is None else state
    k, n = x.shape[0], x.shape[1]
    F = np.empty((k, N_VAR * n))
    dm = np.diff(m)
    P = s.P
    lnr = x[..., LN_R]
    # Centre: unused slots pinned.
    F[:, 0] = x[:, 0, LN_R] - centre_r
    F[:, 1] = x[:, 0, LUM]
    body = F[:, 2:2 + 4 * (n - 1)].reshape(k, n - 1, 4)
    inv_rho = 1.0 / s.rho
    # r_{k+1}^3 - r_k^3 written through expm1 so the tiny steps near the surface keep their digits.
    r3_lo = np.where(np.arange(n - 1) == 0, 0.0, np.exp(3.0 * lnr[:, :-1]))
    dr3 = np.where(np.arange(n - 1) == 0, np.exp(3.0 * lnr[:, 1:]),
                   r3_lo * np.expm1(3.0 * (lnr[:, 1:] - lnr[:, :-1])))
    body[..., 0] = dr3 * (4.0 * np.pi / 3.0) / (dm * 0.5 * (inv_rho[:, 1:] + inv_rho[:, :-1])) - 1.0
    A = s.m_third_over_r**4
    dm23 = np.diff(np.cbrt(m) ** 2)
    p_mean = 0.5 * (P[:, 1:] + P[:, :-1])
    body[..., 1] = (P[:, 1:] - P[:, :-1] + (3.0 * G / (8.0 * np.pi)) * 0.5 * (A[:, 1:] + A[:, :-1]) * dm23) / p_mean
    lnP = np.log(P)
    lnT = x[..., LN_T]
    body[..., 2] = lnT[:, 1:] - lnT[:, :-1] - 0.5 * (s.nabla[:, 1:] + s.nabla[:, :-1]) * (lnP[:, 1:] - lnP[:, :-1])
    body[..., 3] = x[:, 1:, LUM] - x[:, :-1, LUM] - dm * 0.5 * (s.eps[:, 1:] + s.eps[:, :-1]) / L_scale
    # Photosphere.
    R = s.r[:, -1]
    L_s = s.L[:, -1]
    with np.errstate(invalid="ignore", divide="ignore"):
        T_eff4 = L_s / (4.0 * np.pi * SIGMA_SB * R * R)
        F[:, -2] = 4.0 * lnT[:, -1] - np.log(T_eff4)
    T_eff = np.where(T_eff4 > 0.0, T_eff4, np.nan) ** 0.25
    gs = G * m[-1] / (R * R)
    if np.all(np.isfinite(T_eff)):
        start = None if cache is None else cache.get("atmosphere")
        atm = photosphere(gs, T_eff, X[-1], Z, physics.kappa, physics.eos, start=start)
        if cache is not None:
            cache["atmosphere"] = atm.ln_rho[0]
        F[:, -1] = lnP[:, -1] - np.log(atm.P)
    else:
        F[:, -1] = np.nan
    return F, s
