"""Built-in opacity laws: electron scattering, Kramers, H-minus and a combined law.

Every law returns a Rosseland-mean opacity in cm^2/g and broadcasts over all
of its inputs: the host passes rho and T of shape ``[n, ngrid]`` with X, Z and
the law's parameters of shape ``[n, 1]``, or everything ``[n]``, or scalars.

The Kramers and H-minus coefficients are those of Carroll & Ostlie (1996,
*An Introduction to Modern Astrophysics*, eqs. 9.22, 9.23 and 9.28), which
are written in SI units; converted to cgs (m^2/kg -> cm^2/g is x10, rho in
kg/m^3 is 1e3 rho in g/cm^3) they read

    bound-free  4.34e25 (g_bf / t) Z (1 + X) rho T^-3.5
    free-free   3.68e22 g_ff (1 - Z) (1 + X) rho T^-3.5
    H-minus     2.5e-31 (Z / 0.02) rho^(1/2) T^9

Surface points may carry rho = 0 or T = 0: densities are clipped at 0 and
temperatures at 1 K, which only keeps 0 * inf out of the arithmetic (no law
here is used below 3000 K).
"""

from __future__ import annotations

import numpy as np

from radwalk.constants import M_U, SIGMA_T
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity

KRAMERS_BF = 4.34e25  # cm^2/g at rho = 1 g/cm^3, T = 1 K (Carroll & Ostlie 1996, eq. 9.22)
KRAMERS_FF = 3.68e22  # cm^2/g at rho = 1 g/cm^3, T = 1 K (Carroll & Ostlie 1996, eq. 9.23)
HMINUS = 2.5e-31  # cm^2/g at rho = 1 g/cm^3, T = 1 K, Z = 0.02 (Carroll & Ostlie 1996, eq. 9.28)

# Paczynski (1983, ApJ 267, 315) fit to the Buchler & Yueh (1976) electron
# scattering opacity, with degeneracy and Klein-Nishina terms (from memory).
HOT_DEGENERACY = 2.7e11  # K^2 cm^3 / g
HOT_KLEIN_NISHINA_T = 4.5e8  # K
HOT_KLEIN_NISHINA_POWER = 0.86

# Novotny (1973, p. 469) fit of the guillotine factor, t = 0.708 (rho (1+X))^0.2
# with rho in kg/m^3 (the SI form Carroll & Ostlie quote; from memory that the
# density there is in SI).  In cgs: t = 0.708 * 1e3^0.2 (rho (1+X))^0.2 = 2.82 (...)^0.2.
GUILLOTINE_FIT = 0.708
GUILLOTINE_RANGE = (1.0, 100.0)  # range Carroll & Ostlie give for t

MOLECULAR_PER_Z = 0.1  # cm^2/g per unit Z: molecular floor (common practice, no source)

# H-minus needs free electrons, which at Z -> 0 come from hydrogen itself; an
# effective metallicity floor keeps the law positive at Z = 0 (order of
# magnitude, no source; far below the law's validity range Z >= 0.001).
HMINUS_Z_FLOOR = 1e-4

_T_FLOOR = 1.0  # K; see the module docstring


def _arrays(*values):
    return tuple(np.asarray(v, dtype=float) for v in values)


def _fields(rho, T):
    rho, T = _arrays(rho, T)
    return np.maximum(rho, 0.0), np.maximum(T, _T_FLOOR)


def _full(value, *inputs):
    """``value`` broadcast to the common shape of all inputs (a fresh array)."""
    shape = np.broadcast_shapes(*(np.shape(a) for a in inputs))
    return np.array(np.broadcast_to(value, shape), dtype=float)


def thomson(X):
    """Electron-scattering opacity sigma_T / (mu_e m_u) of a fully ionised gas.

    Parameters
    ----------
    X : array_like, dimensionless
        Hydrogen mass fraction (mu_e = 2 / (1 + X)).

    Returns
    -------
    ndarray, cm^2/g
        About 0.2004 (1 + X).
    """
    return SIGMA_T * (1.0 + np.asarray(X, dtype=float)) / (2.0 * M_U)


def hot_scattering_factor(rho, T):
    """Reduction of electron scattering by degeneracy and Klein-Nishina effects.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K

    Returns
    -------
    ndarray, dimensionless
        1 / [(1 + 2.7e11 rho / T^2)(1 + (T / 4.5e8)^0.86)], in (0, 1]
        (Paczynski 1983 fit to Buchler & Yueh 1976; from memory).
    """
    rho, T = _fields(rho, T)
    with np.errstate(over="ignore"):
        degeneracy = 1.0 + HOT_DEGENERACY * rho / T**2
        klein_nishina = 1.0 + (T / HOT_KLEIN_NISHINA_T) ** HOT_KLEIN_NISHINA_POWER
        return 1.0 / (degeneracy * klein_nishina)


def guillotine_fit(rho, X):
    """Guillotine factor t from the density fit, clipped to [1, 100].

    Parameters
    ----------
    rho : array_like, g/cm^3
    X : array_like, dimensionless

    Returns
    -------
    ndarray, dimensionless
        t = 0.708 (rho_SI (1 + X))^0.2 with rho_SI = 1e3 rho in kg/m^3
        (Novotny 1973, p. 469), i.e. 2.82 (rho (1 + X))^0.2 in cgs; clipped to
        the range 1 <= t <= 100 Carroll & Ostlie give, because t < 1 would
        raise the bound-free opacity above its unscreened hydrogenic value
        (the fit falls below 1 under about 1e-3 g/cm^3).
    """
    rho, X = _arrays(rho, X)
    t = GUILLOTINE_FIT * (1e3 * np.maximum(rho, 0.0) * (1.0 + X)) ** 0.2
    return np.clip(t, *GUILLOTINE_RANGE)


def guillotine_factor(rho, X, guillotine=0.0):
    """The guillotine factor actually used: a fixed t >= 1, or the fit below 1."""
    guillotine = np.asarray(guillotine, dtype=float)
    return np.where(guillotine >= 1.0, guillotine, guillotine_fit(rho, X))


def kramers_bound_free(rho, T, X, Z, g_bf=1.0, guillotine=0.0):
    """Kramers bound-free opacity, 4.34e25 (g_bf / t) Z (1 + X) rho T^-3.5.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
    g_bf : array_like, dimensionless
        Bound-free Gaunt factor.
    guillotine : array_like, dimensionless
        Fixed guillotine factor t (>= 1), or a value below 1 for the fit
        :func:`guillotine_fit`.

    Returns
    -------
    ndarray, cm^2/g
    """
    rho, T = _fields(rho, T)
    X, Z, g_bf = _arrays(X, Z, g_bf)
    t = guillotine_factor(rho, X, guillotine)
    with np.errstate(over="ignore"):
        return KRAMERS_BF * (g_bf / t) * Z * (1.0 + X) * rho * T**-3.5


def kramers_free_free(rho, T, X, Z, g_ff=1.0):
    """Kramers free-free opacity, 3.68e22 g_ff (1 - Z)(1 + X) rho T^-3.5.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
    g_ff : array_like, dimensionless
        Free-free Gaunt factor.

    Returns
    -------
    ndarray, cm^2/g
    """
    rho, T = _fields(rho, T)
    X, Z, g_ff = _arrays(X, Z, g_ff)
    with np.errstate(over="ignore"):
        return KRAMERS_FF * g_ff * (1.0 - Z) * (1.0 + X) * rho * T**-3.5


def h_minus(rho, T, Z):
    """H-minus opacity of cool envelopes, 2.5e-31 (Z / 0.02) rho^(1/2) T^9.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    Z : array_like, dimensionless
        Metal mass fraction (the source of free electrons); floored at 1e-4.

    Returns
    -------
    ndarray, cm^2/g
    """
    rho, T = _fields(rho, T)
    Z = np.maximum(np.asarray(Z, dtype=float), HMINUS_Z_FLOOR)
    with np.errstate(over="ignore"):
        return HMINUS * (Z / 0.02) * np.sqrt(rho) * T**9


def _kramers_params() -> tuple[Param, ...]:
    # A fresh tuple per component: the registry records each Param's owner.
    return (
        Param("g_bf", "", 0.1, 10.0, 1.0, "bound-free Gaunt factor of the Kramers law",
              latex=r"$g_{\rm bf}$"),
        Param("g_ff", "", 0.1, 10.0, 1.0, "free-free Gaunt factor of the Kramers law",
              latex=r"$g_{\rm ff}$"),
        Param("guillotine", "", 0.0, 100.0, 0.0,
              "bound-free guillotine factor t; below 1 (default 0) uses the density fit "
              "t = 2.82 (rho (1+X))^0.2, rho in g/cm^3 (Novotny 1973)",
              latex=r"$t$"),
    )


class ElectronScattering:
    """Thomson scattering on free electrons, optionally corrected when hot or dense."""

    name = "electron-scattering"
    description = "Thomson electron scattering sigma_T / (mu_e m_u), fully ionised gas"
    validity = Validity(
        T=(1e5, 1e8),
        rho=(0.0, 1e3),
        note=(
            "fully ionised gas; the whole opacity only where absorption is weaker (hot, tenuous "
            "gas); without hot_correction it is too high by (T/4.5e8)^0.86 (27% at 1e8 K) and by "
            "2.7e11 rho/T^2 when dense (17% at the solar centre)"
        ),
    )

    def __init__(self):
        self.params = (
            Param("hot_correction", "", 0.0, 1.0, 0.0,
                  "1 applies the degeneracy and Klein-Nishina correction (Paczynski 1983), 0 pure "
                  "Thomson; values between blend linearly", latex=r"$f_{\rm hot}$"),
        )

    def kappa(self, rho, T, X, Z, hot_correction=0.0):
        """Electron-scattering opacity.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        hot_correction : array_like, dimensionless
            0 for pure Thomson scattering, 1 for the corrected fit.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        h = np.asarray(hot_correction, dtype=float)
        base = thomson(X)
        if np.all(h == 0):
            return _full(base, rho, T, X, Z, h)
        factor = hot_scattering_factor(rho, T)
        return _full(base * (1.0 - h + h * factor), rho, T, X, Z, h)


class Kramers:
    """Kramers bound-free plus free-free absorption (no electron scattering)."""

    name = "kramers"
    description = "Kramers bound-free + free-free absorption with Gaunt and guillotine factors"
    validity = Validity(
        T=(1e4, 1e8),
        rho=(1e-10, 1e3),
        Z=(0.0, 0.1),
        note=(
            "below 1e4 K hydrogen recombines and free electrons run out; above 1e8 K the metals "
            "are fully ionised and bound-free absorption ends; at high density electron "
            "degeneracy is ignored; no electron scattering is included"
        ),
    )

    def __init__(self):
        self.params = _kramers_params()

    def kappa(self, rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
        """Kramers opacity, bound-free + free-free.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        g_bf, g_ff : array_like, dimensionless
            Gaunt factors.
        guillotine : array_like, dimensionless
            Fixed t >= 1, or below 1 for the density fit.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        k = kramers_bound_free(rho, T, X, Z, g_bf, guillotine) + kramers_free_free(rho, T, X, Z, g_ff)
        return _full(k, rho, T, X, Z, g_bf, g_ff, guillotine)


class HMinus:
    """Absorption by the negative hydrogen ion in cool envelopes."""

    name = "h-minus"
    description = "H-minus absorption of cool envelopes, 2.5e-31 (Z/0.02) rho^0.5 T^9"
    validity = Validity(
        T=(3e3, 6e3),
        rho=(1e-10, 1e-5),
        Z=(0.001, 0.03),
        note="cool envelopes and atmospheres, Carroll & Ostlie 1996 eq. 9.28",
    )

    def __init__(self):
        self.params = ()

    def kappa(self, rho, T, X, Z):
        """H-minus opacity.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
            X is not used.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        return _full(h_minus(rho, T, Z), rho, T, X, Z)


class Combined:
    """Interior + envelope law: molecular floor plus H-minus in series with the rest.

    kappa = kappa_mol + 1 / (1/kappa_H- + 1/(kappa_es + kappa_Kramers)) with
    kappa_mol = 0.1 Z cm^2/g.  The harmonic sum lets H-minus cut the opacity
    off in cool gas, where it is far below the Kramers value that would
    otherwise hold, and hands over smoothly to Kramers and electron scattering
    in the interior (common practice in analytic stellar models, no source).
    """

    name = "combined"
    description = "molecular floor + H-minus in series with electron scattering + Kramers, 3e3-1e8 K"
    validity = Validity(
        T=(3e3, 1e8),
        rho=(1e-10, 1e3),
        Z=(0.0, 0.05),
        note="stellar envelopes and interiors; good to a factor ~2-3 against tabulated opacities",
    )

    def __init__(self):
        self.params = _kramers_params()

    def kappa(self, rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
        """Combined opacity.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        g_bf, g_ff, guillotine : array_like, dimensionless
            Parameters of the Kramers part (see :class:`Kramers`).

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs; positive wherever Z > 0.
        """
        interior = (
            thomson(X)
            + kramers_bound_free(rho, T, X, Z, g_bf, guillotine)
            + kramers_free_free(rho, T, X, Z, g_ff)
        )
        hm = h_minus(rho, T, Z)
        # 1/0 = inf where rho = 0 makes the series term 0; 1/inf = 0 where H-minus overflows.
        with np.errstate(divide="ignore"):
            series = 1.0 / (1.0 / hm + 1.0 / interior)
        k = MOLECULAR_PER_Z * np.asarray(Z, dtype=float) + series
        return _full(k, rho, T, X, Z, g_bf, g_ff, guillotine)


@hookimpl
def radwalk_opacities():
    return [ElectronScattering(), Kramers(), HMinus(), Combined()]
