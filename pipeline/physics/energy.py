"""Nuclear energy generation by the pp chain and the CNO cycle.

The rates are the analytic fits of Carroll & Ostlie (1996, *An Introduction
to Modern Astrophysics*, ch. 10, eqs. 10.46 and 10.58), which are written in
SI units (rho in kg/m^3, result in W/kg).  Here they are in cgs: rho in
g/cm^3 and the result in erg g^-1 s^-1.  With rho_SI = 1e3 rho_cgs and
1 W/kg = 1e4 erg g^-1 s^-1 the prefactors become

* pp:  0.241   x 1e3 x 1e4 = 2.41e6
* CNO: 8.67e20 x 1e3 x 1e4 = 8.67e27

so that

    eps_pp  = 2.41e6  rho X^2     f_pp psi_pp C_pp  T6^(-2/3) exp(-33.80  T6^(-1/3))
    eps_CNO = 8.67e27 rho X X_CNO         C_CNO T6^(-2/3) exp(-152.28 T6^(-1/3))

with T6 = T / 1e6 K and the higher-order factors

    C_pp  = 1 + 0.0123 T6^(1/3) + 0.0109 T6^(2/3) + 0.0009   T6
    C_CNO = 1 + 0.0027 T6^(1/3) - 0.00778 T6^(2/3) - 0.000149 T6.

Screening of the pp rate is the weak (Debye-Hueckel) limit of Salpeter (1954),
as given by Kippenhahn, Weigert & Weiss (2012, *Stellar Structure and
Evolution*, 2nd ed., section 18.4): f = exp(s) with

    s = 0.188 Z1 Z2 zeta rho^(1/2) T6^(-3/2),
    zeta^2 = sum_i (Z_i^2 + Z_i) X_i / A_i,

and Z1 Z2 = 1 for p + p.  The 0.188 is e^2 / (k T r_D) at rho = 1 g/cm^3,
T6 = 1 and zeta = 1 (r_D the Debye radius).  The weak limit holds for s << 1
(s = 0.05 at the solar centre), where exp(s) = 1 + s; this module uses
f_pp = 1 + s.  The exponential form, taken outside its range, grows faster
than the Gamow factor falls and sends the rate to infinity at low
temperature; the linear form does not.  For X = 0.7, Z = 0.02 it reads
f_pp = 1 + 0.25 rho^(1/2) T6^(-3/2).  The CNO fit carries no screening factor
of its own, as in Carroll & Ostlie.

The CNO mass fraction is taken as X_CNO = 0.7 Z (common practice, no source:
C, N and O make up roughly 70 % of the metals by mass in a solar-like mix).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from radwalk.host.params import Validity

# Prefactors of the fits converted to cgs (see the module docstring).
PP_COEFF = 0.241 * 1e3 * 1e4  # erg g^-1 s^-1 per (g/cm^3)
CNO_COEFF = 8.67e20 * 1e3 * 1e4  # erg g^-1 s^-1 per (g/cm^3)
PP_BARRIER = 33.80  # Gamow exponent of p + p, in units of T6^(-1/3)
CNO_BARRIER = 152.28  # Gamow exponent of 14N + p, in units of T6^(-1/3)

X_CNO_PER_Z = 0.7  # X_CNO = 0.7 Z (common practice, no source)

# Weak-screening coefficient e^2 / (k T r_D) at rho = 1 g/cm^3, T6 = 1, zeta = 1.
SCREEN_COEFF = 0.188
# (Z_i^2 + Z_i) / A_i averaged over a solar-like metal mix: about 3.5 for C,
# 4.5 for O, 5.5 for Ne and 12.5 for Fe, mass-weighted to about 5 (estimated
# here; the term changes zeta by under 2 % at Z = 0.02).
_METAL_ZETA2 = 5.0

VALIDITY = Validity(
    T=(4.0e6, 5.0e7),
    rho=(0.0, 1.0e3),
    Z=(0.0, 0.05),
    note=(
        "analytic pp and CNO fits (Carroll & Ostlie 1996, ch. 10) for hydrogen burning; "
        "weak screening only, so high densities at low temperature are underestimated; "
        "below 4e6 K the rates are negligibly small, above 5e7 K the fits and the "
        "CN-equilibrium assumption degrade"
    ),
)


def _as_float(*arrays):
    return tuple(np.asarray(a, dtype=float) for a in arrays)


def _safe_t6(T):
    """T6 with non-positive temperatures replaced by 1 and the mask of valid ones.

    Rates are set to zero where T <= 0 (a surface point may carry T = 0); the
    placeholder keeps 0 * inf out of the arithmetic.
    """
    T = np.asarray(T, dtype=float)
    ok = T > 0
    return np.where(ok, T, 1e6) / 1e6, ok


def screening_zeta(X, Z=None):
    """Charge parameter zeta of the weak-screening factor, fully ionised gas.

    Parameters
    ----------
    X : array_like, dimensionless
        Hydrogen mass fraction.
    Z : array_like, dimensionless, optional
        Metal mass fraction (0 if not given).

    Returns
    -------
    ndarray, dimensionless
        zeta = sqrt(2 X + 1.5 Y + 5 Z) with Y = 1 - X - Z (non-degenerate
        electrons counted in full).
    """
    X = np.asarray(X, dtype=float)
    Z = np.zeros_like(X) if Z is None else np.asarray(Z, dtype=float)
    Y = np.clip(1.0 - X - Z, 0.0, 1.0)
    return np.sqrt(np.maximum(2.0 * X + 1.5 * Y + _METAL_ZETA2 * Z, 0.0))


def screening_pp(rho, T, X, Z=None):
    """Weak-screening enhancement factor f_pp of the p + p reaction.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X : array_like, dimensionless
    Z : array_like, dimensionless, optional

    Returns
    -------
    ndarray, dimensionless
        f_pp = 1 + 0.188 zeta rho^(1/2) T6^(-3/2), the weak-screening
        factor exp(s) of Salpeter (1954; Kippenhahn, Weigert & Weiss 2012,
        sect. 18.4) to first order in s; 1 where T <= 0.
    """
    rho, X = _as_float(rho, X)
    t6, ok = _safe_t6(T)
    return np.where(ok, 1.0 + _screening_s(rho, t6, X, Z), 1.0)


def _screening_s(rho, t6, X, Z):
    """Debye-Hueckel energy over kT for p + p (Z1 Z2 = 1)."""
    return SCREEN_COEFF * screening_zeta(X, Z) * np.sqrt(np.maximum(rho, 0.0)) * t6**-1.5


def _c_pp(t6):
    c = t6 ** (1.0 / 3.0)
    return 1.0 + 0.0123 * c + 0.0109 * c**2 + 0.0009 * t6


def _dc_pp(t6):
    """d C_pp / d ln T."""
    c = t6 ** (1.0 / 3.0)
    return 0.0123 / 3.0 * c + 0.0109 * 2.0 / 3.0 * c**2 + 0.0009 * t6


def _c_cno(t6):
    c = t6 ** (1.0 / 3.0)
    # The fit turns negative near 1.2e9 K, far outside VALIDITY; clip so the
    # rate stays non-negative there.
    return np.maximum(1.0 + 0.0027 * c - 0.00778 * c**2 - 0.000149 * t6, 0.0)


def _dc_cno(t6):
    """d C_CNO / d ln T."""
    c = t6 ** (1.0 / 3.0)
    return 0.0027 / 3.0 * c - 0.00778 * 2.0 / 3.0 * c**2 - 0.000149 * t6


def _gamow(t6, barrier):
    """T6^(-2/3) exp(-barrier T6^(-1/3)); underflows silently to 0 at low T."""
    with np.errstate(under="ignore"):
        return t6 ** (-2.0 / 3.0) * np.exp(-barrier * t6 ** (-1.0 / 3.0))


def eps_pp(rho, T, X, Z=None, *, psi_pp: float = 1.0):
    """Energy generation rate of the pp chain.

    Parameters
    ----------
    rho : array_like, g/cm^3
        Density.
    T : array_like, K
        Temperature.
    X : array_like, dimensionless
        Hydrogen mass fraction.
    Z : array_like, dimensionless, optional
        Metal mass fraction; enters only the screening factor (0 if omitted).
    psi_pp : float or array_like, dimensionless
        Correction for the branches of the chain: 1 in the ppI limit (the
        default), rising towards 2 when ppII and ppIII take over at higher
        temperature; the physical range is 1 to 2.

    Returns
    -------
    ndarray, erg g^-1 s^-1
        Broadcast shape of the inputs; exactly 0 where T <= 0 or where the
        Gamow factor underflows (T below about 90 K; at 1e3 K the rate is
        ~1e-135, negligible but not zero).
    """
    rho, X, psi = _as_float(rho, X, psi_pp)
    t6, ok = _safe_t6(T)
    rho = np.maximum(rho, 0.0)
    f = screening_pp(rho, np.where(ok, t6 * 1e6, 1e6), X, Z)
    with np.errstate(under="ignore"):
        eps = PP_COEFF * rho * X**2 * f * psi * _c_pp(t6) * _gamow(t6, PP_BARRIER)
    return np.where(ok, eps, 0.0)


def eps_cno(rho, T, X, Z):
    """Energy generation rate of the CNO cycle (in CN equilibrium).

    Parameters
    ----------
    rho : array_like, g/cm^3
        Density.
    T : array_like, K
        Temperature.
    X : array_like, dimensionless
        Hydrogen mass fraction.
    Z : array_like, dimensionless
        Metal mass fraction; X_CNO = 0.7 Z.

    Returns
    -------
    ndarray, erg g^-1 s^-1
        Broadcast shape of the inputs; exactly 0 where T <= 0 or the Gamow
        factor underflows (T below about 8.5e3 K).
    """
    rho, X, Z = _as_float(rho, X, Z)
    t6, ok = _safe_t6(T)
    rho = np.maximum(rho, 0.0)
    with np.errstate(under="ignore"):
        eps = CNO_COEFF * rho * X * (X_CNO_PER_Z * Z) * _c_cno(t6) * _gamow(t6, CNO_BARRIER)
    return np.where(ok, eps, 0.0)


def eps_nuclear(rho, T, X, Z, *, psi_pp: float = 1.0):
    """Total hydrogen-burning energy generation rate, pp + CNO.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
    psi_pp : float or array_like, dimensionless
        See :func:`eps_pp`.

    Returns
    -------
    ndarray, erg g^-1 s^-1
    """
    return eps_pp(rho, T, X, Z, psi_pp=psi_pp) + eps_cno(rho, T, X, Z)


class TemperatureExponents(NamedTuple):
    """Logarithmic temperature derivatives nu = d ln eps / d ln T (dimensionless)."""

    pp: np.ndarray
    cno: np.ndarray
    total: np.ndarray


def temperature_exponents(rho, T, X, Z, *, psi_pp: float = 1.0) -> TemperatureExponents:
    """Temperature sensitivities of the pp, CNO and total rates (analytic).

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
        Must be positive.
    X, Z : array_like, dimensionless
    psi_pp : float or array_like, dimensionless
        See :func:`eps_pp` (held constant in the derivative).

    Returns
    -------
    TemperatureExponents
        ``pp``, ``cno`` and ``total`` = d ln eps / d ln T at fixed rho.  The
        total is the rate-weighted mean of the two; where both rates underflow
        it is the pp value, the chain that dominates at low temperature.
    """
    rho, X, Z = _as_float(rho, X, Z)
    t6 = np.asarray(T, dtype=float) / 1e6
    third = t6 ** (-1.0 / 3.0)
    s = _screening_s(rho, t6, X, Z)
    nu_pp = -2.0 / 3.0 + PP_BARRIER / 3.0 * third + _dc_pp(t6) / _c_pp(t6) - 1.5 * s / (1.0 + s)
    c_cno = _c_cno(t6)
    with np.errstate(divide="ignore", invalid="ignore"):
        dc = np.where(c_cno > 0, _dc_cno(t6) / c_cno, 0.0)
    nu_cno = -2.0 / 3.0 + CNO_BARRIER / 3.0 * third + dc
    e_pp = eps_pp(rho, T, X, Z, psi_pp=psi_pp)
    e_cno = eps_cno(rho, T, X, Z)
    tot = e_pp + e_cno
    with np.errstate(divide="ignore", invalid="ignore"):
        weighted = (e_pp * nu_pp + e_cno * nu_cno) / tot
    nu_pp, nu_cno = np.broadcast_arrays(nu_pp, nu_cno)
    total = np.where(tot > 0, weighted, nu_pp)
    return TemperatureExponents(np.array(nu_pp), np.array(nu_cno), total)
