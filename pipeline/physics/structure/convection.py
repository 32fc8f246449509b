"""Convective instability and mixing-length theory.

Instability by the Schwarzschild criterion, nabla_rad > nabla_ad (the
composition is uniform on the zero-age main sequence, where it equals the
Ledoux criterion; the Ledoux term is not used here).  In unstable layers the
actual temperature gradient comes from the mixing-length theory of
Böhm-Vitense (1958, Z. Astrophys. 46, 108) in the form of Kippenhahn,
Weigert & Weiss (2012, *Stellar Structure and Evolution*, 2nd ed., ch. 7,
eqs. 7.6-7.18):

    U = 3 a c T^3 / (c_P rho^2 kappa l^2) * sqrt(8 H_P / (g delta)),  l = alpha H_P,
    W = nabla_rad - nabla_ad,
    (zeta - U)^3 + (8 U / 9) (zeta^2 - U^2 - W) = 0,
    nabla = nabla_ad + zeta^2 - U^2,   nabla - nabla_e = (zeta - U)^2,
    v^2 = g delta (nabla - nabla_e) l^2 / (8 H_P).

With g H_P = P / rho these become U = (3 a c T^3 / (c_P rho^2 kappa alpha^2))
sqrt(8 / delta) (rho / P)^(3/2) g and v = alpha sqrt(delta P / (8 rho))
(zeta - U): both finite at the centre, where g -> 0 makes U -> 0 and the
gradient adiabatic.  The correction for optically thin bubbles (radiative
losses of small eddies, KWW sect. 7.2 remarks; Böhm-Vitense 1958) is not
applied: the outer boundary is the photosphere, and the correction changes
only the thin superadiabatic layer just below it.

At W = 0 the root is zeta = U and nabla = nabla_rad = nabla_ad, and for
small W > 0 nabla = nabla_rad - O(W^2 / U): the gradient is continuous with
a continuous first derivative across the boundary of a convective zone,
which keeps the Newton iteration of the solver smooth.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from radwalk.constants import A_RAD, C, G

__all__ = ["ConvectionState", "mlt_gradient", "radiative_gradient"]

_CUBIC_ITER = 60  # monotone Newton from an upper bound: ~6-12 steps reach 1e-15
_CUBIC_TOL = 1e-15


class ConvectionState(NamedTuple):
    """Temperature gradient and convective quantities (arrays of the broadcast shape).

    Attributes
    ----------
    nabla : ndarray
        Actual gradient dlnT/dlnP.
    convective : ndarray of bool
        nabla_rad > nabla_ad (Schwarzschild).
    v_conv : ndarray, cm/s
        Convective velocity (0 in radiative layers).
    conv_flux_fraction : ndarray
        Fraction of the energy flux carried by convection, 1 - nabla / nabla_rad (0 where radiative).
    U : ndarray
        The MLT efficiency parameter U (small U: efficient, nabla -> nabla_ad).
    """

    nabla: np.ndarray
    convective: np.ndarray
    v_conv: np.ndarray
    conv_flux_fraction: np.ndarray
    U: np.ndarray


def radiative_gradient(kappa, L_over_m, P, T):
    """Radiative temperature gradient nabla_rad = 3 kappa L P / (16 pi a c G m T^4).

    Parameters
    ----------
    kappa : array_like, cm^2/g
    L_over_m : array_like, erg/(g s)
        Luminosity over enclosed mass L(m)/m (at the centre the limit eps_c).
    P : array_like, dyn/cm^2
    T : array_like, K

    Returns
    -------
    ndarray
        nabla_rad (Kippenhahn, Weigert & Weiss 2012, eq. 5.28).
    """
    return 3.0 * kappa * L_over_m * P / (16.0 * np.pi * A_RAD * C * G * T**4)


def _cubic_root(U, W):
    """Positive root y = zeta - U of y^3 + (8U/9)(y^2 + 2 U y - W) = 0 for W > 0, U >= 0."""
    b = 8.0 * U / 9.0
    # f(y) is increasing and convex for y >= 0 with f(0) = -b W < 0; each of
    # (b W)^(1/3), sqrt(W) and W / (2U) makes one positive term alone exceed
    # b W, so their minimum lies above the root and Newton falls monotonically
    # onto it (no overshoot, no bracketing needed).
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.minimum(np.cbrt(b * W), np.sqrt(W))
        y = np.where(U > 0.0, np.minimum(y, W / (2.0 * U)), y)
    for _ in range(_CUBIC_ITER):
        f = y**3 + b * (y * y + 2.0 * U * y - W)
        df = 3.0 * y * y + b * (2.0 * y + 2.0 * U)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(df > 0.0, f / df, 0.0)
        y = np.maximum(y - step, 0.0)
        if np.all(np.abs(step) <= _CUBIC_TOL * np.maximum(y, 1e-300)):
            break
    return y


def mlt_gradient(nabla_rad, nabla_ad, *, T, rho, P, kappa, c_P, delta, g, alpha):
    """Actual temperature gradient from the Schwarzschild criterion and MLT.

    Parameters
    ----------
    nabla_rad, nabla_ad : array_like
        Radiative and adiabatic gradients.
    T : array_like, K
    rho : array_like, g/cm^3
    P : array_like, dyn/cm^2
    kappa : array_like, cm^2/g
    c_P : array_like, erg/(g K)
    delta : array_like
        -(dln rho / dln T)_P.
    g : array_like, cm/s^2
        Local gravity G m / r^2 (0 at the centre).
    alpha : float
        Mixing-length parameter l / H_P.

    Returns
    -------
    ConvectionState
        All arrays broadcast together.

    Notes
    -----
    Radiative layers get nabla = nabla_rad exactly; convective ones the root
    of the cubic (module docstring), solved by a vectorised monotone Newton
    iteration to ~1e-15 relative.
    """
    nabla_rad, nabla_ad, T, rho, P, kappa, c_P, delta, g = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (nabla_rad, nabla_ad, T, rho, P, kappa, c_P, delta, g))
    )
    # Guard against unphysical EOS states met during the iteration (delta must be positive).
    delta = np.maximum(delta, 1e-12)
    W = nabla_rad - nabla_ad
    convective = W > 0.0
    U = (3.0 * A_RAD * C * T**3 / (c_P * rho * rho * kappa * alpha * alpha)) * np.sqrt(8.0 / delta) \
        * (rho / P) ** 1.5 * g
    y = np.zeros_like(W)
    if convective.any():
        y[convective] = _cubic_root(U[convective], W[convective])
    nabla = np.where(convective, nabla_ad + y * y + 2.0 * U * y, nabla_rad)
    v = np.where(convective, alpha * np.sqrt(delta * P / (8.0 * rho)) * y, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(convective & (nabla_rad > 0.0), 1.0 - nabla / nabla_rad, 0.0)
    return ConvectionState(nabla=nabla, convective=convective, v_conv=v, conv_flux_fraction=frac, U=U)
