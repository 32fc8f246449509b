"""Eddington grey atmosphere: the photospheric pressure that closes the structure equations.

In the grey Eddington approximation (Kippenhahn, Weigert & Weiss 2012, sect.
11.2; Hansen, Kawaler & Trimble 2004, sect. 4.4) the temperature in the
atmosphere is

    T^4(tau) = (3/4) T_eff^4 (tau + 2/3),

so T = T_eff at the photosphere tau = 2/3, and hydrostatic equilibrium in
optical depth reads dP/dtau = g / kappa with g = G M / R^2 constant across
the thin atmosphere.  The photospheric pressure is

    P(2/3) = P_rad(tau = 0) + integral_0^(2/3) g / kappa(rho, T) dtau,

with rho(P, T) from the equation of state and kappa from the opacity law the
solver is given.  The integral is taken on a grid uniform in ln tau from tau_0 = 1e-6, each
interval exactly for g / kappa a power law of tau between its nodes (exact
for constant kappa and for kappa ~ P^a); above tau_0 the
pressure is P ~ (1 + b) g tau / kappa for a local power law kappa ~ P^b.  The
whole profile is found at once by Newton's method on ln rho at every grid
point, whose Jacobian is lower triangular (pressure at tau depends only on the
layers above) and is solved by forward substitution, vectorised over many
atmospheres at once.  The result is a smooth function of g and T_eff, which
the solver's finite-difference Jacobian needs.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from radwalk.constants import K_B, M_U, SIGMA_SB, C
from radwalk.errors import ModelError

__all__ = ["Photosphere", "photosphere", "TAU_PHOTOSPHERE"]

TAU_PHOTOSPHERE = 2.0 / 3.0
_TAU_TOP = 1e-6
_N_TAU = 40
_MAX_ITER = 60
_TOL = 1e-13  # largest Newton step in ln rho at the photosphere at convergence
_TOL_ALL = 1e-6  # largest Newton step in ln rho anywhere at convergence
_MAX_STEP = 1.5  # largest change of ln rho in one Newton step
_KAPPA_STEP = 1e-6  # relative density step for dln kappa / dln rho


class Photosphere(NamedTuple):
    """Photospheric state of grey atmospheres (arrays of the input's broadcast shape).

    Attributes
    ----------
    P : ndarray, dyn/cm^2
        Total pressure at tau = 2/3.
    rho : ndarray, g/cm^3
        Density at tau = 2/3.
    T : ndarray, K
        Temperature at tau = 2/3 (= T_eff).
    iterations : int
        Newton iterations used.
    ln_rho : ndarray [k, n_tau]
        ln rho (g/cm^3) on the optical-depth grid of every atmosphere (flattened inputs), a warm
        start for a nearby call.
    """

    P: np.ndarray
    rho: np.ndarray
    T: np.ndarray
    iterations: int
    ln_rho: np.ndarray


def _expm1_ratio(x):
    """(e^x - 1) / x and its derivative, finite at x = 0 (limits 1 and 1/2)."""
    small = np.abs(x) < 1e-5
    xs = np.where(small, 1.0, x)
    E = np.where(small, 1.0 + x / 2.0 + x * x / 6.0, np.expm1(xs) / xs)
    dE = np.where(small, 0.5 + x / 3.0, (xs * np.exp(xs) - np.expm1(xs)) / (xs * xs))
    return E, dE


def photosphere(g, T_eff, X, Z, kappa, eos, start=None) -> Photosphere:
    """Pressure and density at the photosphere of Eddington grey atmospheres.

    Parameters
    ----------
    g : array_like, cm/s^2
        Surface gravity (any shape, broadcast with T_eff, X, Z).
    T_eff : array_like, K
        Effective temperature.
    X, Z : array_like
        Hydrogen and metal mass fractions of the atmosphere.
    kappa : callable
        ``kappa(rho, T, X, Z)`` in cm^2/g.
    eos : callable
        ``eos(rho, T, X, Z)`` returning an object with ``P`` and ``P_gas``
        (dyn/cm^2) and ``chi_rho``.
    start : ndarray [n_tau] or [k, n_tau], optional
        ln rho profile of a nearby atmosphere (``Photosphere.ln_rho``) to start from.

    Returns
    -------
    Photosphere

    Raises
    ------
    ModelError
        If the Newton iteration does not converge or meets non-finite values.
    """
    g, T_eff, X, Z = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (g, T_eff, X, Z)))
    shape = g.shape
    g, T_eff, X, Z = (a.reshape(-1, 1) for a in (g, T_eff, X, Z))
    ln_tau = np.linspace(np.log(_TAU_TOP), np.log(TAU_PHOTOSPHERE), _N_TAU)
    tau = np.exp(ln_tau)
    T = T_eff * (0.75 * (tau + TAU_PHOTOSPHERE)) ** 0.25  # [k, n_tau]
    # Radiation pressure follows T(tau) exactly: dP_rad/dtau = a T_eff^4 / 4 = sigma T_eff^4 / c.  The
    # gas pressure alone is integrated, dP_gas/dtau = g / kappa - sigma T_eff^4 / c, which stays well
    # conditioned where radiation dominates the thin top layers of hot atmospheres.
    rad_force = SIGMA_SB * T_eff**4 / C

    # Start: ideal gas of mean weight ~1.3 under a pressure g tau / kappa with
    # kappa taken once at a typical photospheric density.
    k0 = kappa(np.full_like(T, 1e-8), T, X, Z)
    p_start = np.maximum(g / k0 - rad_force, 1e-3 * g / k0) * (tau + _TAU_TOP)
    ln_rho = np.log(p_start * 1.3 * M_U / (K_B * T))
    if start is not None and np.shape(start)[-1] == _N_TAU:
        ln_rho = np.broadcast_to(start, ln_rho.shape).copy()

    ln_r = ln_tau[1] - ln_tau[0]
    for it in range(1, _MAX_ITER + 1):  # noqa: B007 - the count is reported after the loop
        rho = np.exp(ln_rho)
        st = eos(rho, T, X, Z)
        kap = kappa(rho, T, X, Z)
        a = np.log(kappa(rho * (1.0 + _KAPPA_STEP), T, X, Z) / kap) / np.log1p(_KAPPA_STEP)
        f = g / kap
        # Each interval integrated exactly for f a power law of tau between its nodes (exact for
        # constant kappa and for H-minus-like kappa ~ P^a, where a trapezoid errs by ~1 %).
        ln_f = np.log(f)
        x = ln_r + ln_f[:, 1:] - ln_f[:, :-1]
        E, dE = _expm1_ratio(x)
        base = tau[:-1] * f[:, :-1] * ln_r
        piece = base * E
        d_right = base * dE  # d piece / d ln f at the right node
        d_left = piece - d_right  # d piece / d ln f at the left node
        # Above tau_0 with kappa ~ P_gas^a: P_gas(tau_0) = (1 + a) g tau_0 / kappa_0 (minus the radiative force).
        a0 = np.maximum(a[:, 0], -0.5)
        top = (1.0 + a0) * tau[0] * f[:, 0] - rad_force[:, 0] * tau[0]
        p_int = top[:, None] + np.concatenate(
            [np.zeros_like(top)[:, None], np.cumsum(piece, axis=1)], axis=1
        ) - rad_force * (tau - tau[0])
        p_gas = st.P_gas
        if not (np.all(np.isfinite(p_int)) and np.all(p_int > 0.0) and np.all(p_gas > 0.0)):
            raise ModelError("grey atmosphere: non-finite or negative gas pressure "
                             f"(g = {g.ravel()[0]:.3g}, T_eff = {T_eff.ravel()[0]:.4g} K; radiative force "
                             "above gravity?)")
        resid = np.log(p_gas) - np.log(p_int)
        chi = st.chi_rho * st.P / p_gas  # (dln P_gas / dln rho)_T
        # Forward substitution on the lower-triangular Newton system:
        # chi_j dl_j + (1/P_j) sum_{i<=j} W_ji f_i a_i dl_i = -resid_j, with W_ji the weight of node i in
        # the integral up to node j (its own half interval while i = j, both halves once i < j).
        c = a  # -d ln f_i / d ln rho_i
        step = np.empty_like(ln_rho)
        acc = np.zeros(g.shape[0])
        for j in range(_N_TAU):
            w_self = (1.0 + a0) * tau[0] * f[:, 0] if j == 0 else d_right[:, j - 1]
            w_full = w_self + (d_left[:, j] if j < _N_TAU - 1 else 0.0)
            denom = chi[:, j] + w_self * c[:, j] / p_int[:, j]
            denom = np.maximum(denom, 0.1 * chi[:, j])
            step[:, j] = (-resid[:, j] - acc / p_int[:, j]) / denom
            acc = acc + w_full * c[:, j] * step[:, j]
        step = np.clip(step, -_MAX_STEP, _MAX_STEP)
        ln_rho = ln_rho + step
        # The top layers converge linearly (the tau_0 term is linearised
        # loosely), but they weigh ~tau_0^(2/3) in the photospheric pressure.
        if np.max(np.abs(step)) < _TOL_ALL and np.max(np.abs(step[:, -1])) < _TOL:
            break
    else:
        raise ModelError(f"grey atmosphere did not converge in {_MAX_ITER} iterations "
                         f"(largest step in ln rho {np.max(np.abs(step)):.2e})")
    rho = np.exp(ln_rho)
    P = eos(rho[:, -1], T[:, -1], X[:, 0], Z[:, 0]).P
    return Photosphere(P=P.reshape(shape), rho=rho[:, -1].reshape(shape), T=T[:, -1].reshape(shape),
                       iterations=it, ln_rho=ln_rho)
