"""Opacity physics: electron scattering, Kramers, H-minus and the default (combined) law's microphysics.

The built-in opacity components (:mod:`radwalk.plugins.opacity`) are thin adapters onto these functions;
the structure solver uses :func:`default_kappa` as its reference law.

Every function returns a Rosseland-mean opacity in cm^2/g and broadcasts over
all of its inputs.

The three textbook laws use the coefficients of Carroll & Ostlie (1996,
*An Introduction to Modern Astrophysics*, eqs. 9.22, 9.23 and 9.28), which
are written in SI units; converted to cgs (m^2/kg -> cm^2/g is x10, rho in
kg/m^3 is 1e3 rho in g/cm^3) they read

    bound-free  4.34e25 (g_bf / t) Z (1 + X) rho T^-3.5
    free-free   3.68e22 g_ff (1 - Z) (1 + X) rho T^-3.5
    H-minus     2.5e-31 (Z / 0.02) rho^(1/2) T^9

The default law (``combined``) is built from the microphysics instead: Saha
ionisation of H, He and the metals with pressure ionisation; electron
scattering on the free electrons; hydrogenic bound-free + free-free absorption
of H and He, Rosseland-averaged over the level populations; H-minus from its
own Saha equation; Rayleigh scattering by neutral hydrogen; and a metal term
of Kramers' form calibrated to standard-solar-model opacities (see
:class:`Combined`).  Its Rosseland averages are computed once, on first use
(~0.05 s), and kept as a cubic spline in ln T.

Surface points may carry rho = 0 or T = 0: the textbook laws clip densities at
0 and temperatures at 1 K, which only keeps 0 * inf out of the arithmetic; the
default law evaluates rho below 1e-30 g/cm^3 at 1e-30 and T outside
300 K - 3e9 K at those bounds.
"""

from __future__ import annotations

from functools import lru_cache
from typing import NamedTuple

import numpy as np
from scipy.interpolate import CubicSpline

from radwalk.constants import E_CHARGE, EV, H_PLANCK, K_B, M_E, M_U, SIGMA_T, C

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


# -- the default law: ionisation, hydrogenic H and He absorption, H-minus, metals --------------
#
# Ionisation energies, eV (NIST Atomic Spectra Database values, from memory).
CHI_H = 13.598434
CHI_HE1 = 24.587389
CHI_HE2 = 54.417765
CHI_HMINUS = 0.754195  # electron affinity of hydrogen (Lykke, Murray & Lineberger 1991, from memory)

# Electron donors of cool gas: Na, Mg, Al, Si, Ca and Fe, 1.1e-4 atoms per H atom in the Sun
# (Asplund et al. 2009 abundances, from memory), abundance-weighted first ionisation energy
# ~7.6 eV.  Per atomic mass unit of metals: 1.1e-4 X_sun / (1.008 Z_sun) = 6.0e-3 with
# X_sun = 0.7381, Z_sun = 0.0134.  Lumping them into one species is our own simplification.
CHI_DONOR = 7.6  # eV
DONORS_PER_METAL_MU = 6.0e-3

A_H = 1.00794  # atomic masses in m_u
A_HE = 4.002602
A_METAL = 16.0  # mean nuclear mass of the metals, for the nucleus count only

BOHR = 5.29177210903e-9  # cm (CODATA 2018)

# Occupation probability of a bound state, w = exp(-(4 pi/3) d^3 n_nuc): the hard-sphere
# (neutral-perturber) term of Hummer & Mihalas (1988, ApJ 331, 794; from memory), used here
# for all nuclei as perturbers.  It ionises the gas by pressure, which the Saha equation
# alone does not (it leaves hydrogen a quarter neutral at the solar centre).  Exclusion
# diameters: twice the ground-state radius a0/z of each species, z = sqrt(chi/13.6 eV) (our choice).
def _excluded_volume(diameter_bohr):
    return 4.0 * np.pi / 3.0 * (diameter_bohr * BOHR) ** 3


VOLUME_H = _excluded_volume(2.0)
VOLUME_HE1 = _excluded_volume(2.0 * np.sqrt(CHI_H / CHI_HE1))
VOLUME_HE2 = _excluded_volume(1.0)
VOLUME_DONOR = _excluded_volume(2.0 * np.sqrt(CHI_H / CHI_DONOR))
VOLUME_HMINUS = _excluded_volume(2.0 * np.sqrt(CHI_H / CHI_HMINUS))

SAHA = (2.0 * np.pi * M_E * K_B / H_PLANCK**2) ** 1.5  # cm^-3 K^-1.5, 2.415e15
KT_EV = K_B / EV  # eV per K
NEWTON_STEPS = 5  # converge ln n_e to 1e-13 on 1e3-1e9 K, 1e-14-1e6 g/cm^3 (tested)
_RHO_FLOOR = 1e-30  # g/cm^3; surface points with rho = 0 are evaluated here
_T_RANGE = (300.0, 3e9)  # K; the default law is evaluated at these bounds outside them

# H-minus bound-free cross-section: peak 4.2e-17 cm^2 near 0.85 micron (Wishart 1979, MNRAS
# 187, 59P; from memory), with the shape of a weakly bound electron in a zero-range potential,
# sigma ~ (E - E_b)^(3/2) / E^3 (textbook quantum mechanics; it peaks at E = 2 E_b = 1.51 eV,
# 0.82 micron, as the measured cross-section does).
HMINUS_PEAK = 4.2e-17  # cm^2

# Metal absorption (Kramers bound-free form, Schwarzschild 1958; 4.34e25 in cgs, Carroll &
# Ostlie 1996 eq. 9.22) times three factors of our own: an effective Gaunt-and-line factor, a
# guillotine factor t = sqrt(1 + a rho (1 + X)), and the square root of helium's ionised
# fraction as the switch-on (Kramers' formula has no meaning for neutral metals; the second
# ionisation energies of Mg, Si, Fe, C, N and O spread over 15-35 eV around helium's 24.6 eV,
# so the metals switch on over a wider range than helium itself; the root also keeps
# d ln kappa / d ln T below 20 in helium-rich gas).  The line factor and
# a are fitted to standard solar model opacities at the centre (1.2-1.5 cm^2/g) and at the
# base of the convection zone (~20 cm^2/g; both from memory).  The guillotine makes the term
# rise as rho^(1/2) in dense gas, as tabulated interior opacities do (roughly, from memory).
# Novotny's rho^0.2 fit with a temperature stripping factor 1 + (T/9.2e6 K)^3 matched the same
# two points but fell as T^-6 at the solar centre: the homology mass-luminosity slope
# between 1.05 and 2.4 M_sun came out 5.7 against Eker et al.'s (2018) observed 4.3 (4.85 now).
METAL_LINE_FACTOR = 2.28
GUILLOTINE_DENSITY = 8.75  # cm^3/g

# Rayleigh scattering by neutral hydrogen: leading term of Dalgarno's fit,
# sigma = 5.799e-13 cm^2 (lambda / 1 Angstrom)^-4 (Dalgarno 1962, as used by Kurucz 1970; from
# memory).  Averaged over the Rosseland weight, <x^4> = 8! zeta(8) / (4! zeta(4)) = 1558.2, so
# sigma_mean = 5.799e-13 * 1558.2 (T / 1.43878e8 K)^4 = 2.109e-42 T^4 cm^2; joined harmonically to
# sigma_T, which bound electrons approach far above their resonances.
RAYLEIGH_T4 = 5.799e-13 * 1558.2 / 1.43878e8**4  # cm^2 K^-4

# Beyond log R = log rho - 3 log(T / 1e6 K) = 2, cooler and denser than any star (stars and the
# opacity tables stop at log R = 1, Iglesias & Rogers 1996, from memory), the law is evaluated
# at a density that saturates smoothly at log R = 2: rho / (1 + (rho / rho_2)^4)^(1/4).  It
# changes kappa by less than 3e-5 at log R <= 1 and keeps the non-stellar corner (pressure-
# ionised free-free without degeneracy, steep neutral Saha slopes) from dominating anything.
LOG_R_MAX = 2.0
SATURATION_POWER = 4.0

# Molecules (H2O, CO, TiO) below ~4000 K: a floor of 0.1 Z cm^2/g (common practice, no
# source), faded out above 5000 K where molecules are dissociated (our choice).
MOLECULAR_T = 5000.0  # K
MOLECULAR_POWER = 8.0

# Rosseland quadrature: x = h nu / kT up to 60 (the weight beyond is below 1e-19), hydrogenic
# levels n = 1..400, nodes in ln T for the cubic spline of the mean absorption factors.
_X_MAX = 60.0
_N_X = 12000
_N_LEVELS = 400
_N_NODES = 500


def _rosseland_weight():
    """x = h nu/kT [nx] and the Rosseland weight dB/dT normalised to unit integral [nx]."""
    x = np.linspace(0.0, _X_MAX, _N_X + 1)[1:]
    w = x**4 * np.exp(-x) / (-np.expm1(-x)) ** 2 / (4.0 * np.pi**4 / 15.0)
    return x, w


def _level_sum_factor(u, ground_weight, excited_ratio, x, cumulative, i_ff):
    """Rosseland mean of hydrogenic bound-free + free-free over free-free alone.

    The monochromatic absorption of an ion of charge z with LTE level
    populations is the free-free Kramers value times
    F(x) = 1 + sum_n 2 u_n n^-3 exp(u_n / n^2) [x >= u_n / n^2] (Kramers 1923
    cross-sections, Saha-Boltzmann populations, Gaunt factors 1; Menzel &
    Pekeris 1935), u_n = z^2 chi_H / kT.  Its Rosseland mean is the free-free
    mean times i_ff / int(base / F).

    Parameters
    ----------
    u : ndarray [nodes]
        Ground-state ionisation energy over kT.
    ground_weight : float
        Weight of the n = 1 term relative to the hydrogenic one.
    excited_ratio : float
        Binding energy of the excited levels over the hydrogenic value of the
        ground state's charge (1 for hydrogenic ions).
    x, cumulative : ndarray [nx]
        Quadrature grid and the running integral of the free-free integrand.
    i_ff : float
        The full free-free integral.

    Returns
    -------
    ndarray [nodes], dimensionless, >= 1
    """
    n = np.arange(1, _N_LEVELS + 1, dtype=float)[::-1]  # thresholds in ascending order
    u = np.asarray(u, dtype=float)[:, None]
    u_n = np.where(n == 1, u, excited_ratio * u)
    threshold = u_n / n**2
    amplitude = 2.0 * u_n * n**-3 * np.exp(np.minimum(threshold, _X_MAX + 1.0))
    amplitude = amplitude * np.where(n == 1, ground_weight, 1.0)
    F = 1.0 + np.concatenate([np.zeros_like(u), np.cumsum(amplitude, axis=1)], axis=1)
    edges = np.concatenate([np.zeros_like(u), np.minimum(threshold, _X_MAX), np.full_like(u, _X_MAX)], axis=1)
    b = np.interp(edges, np.concatenate([[0.0], x]), np.concatenate([[0.0], cumulative]))
    return i_ff / np.sum(np.diff(b, axis=1) / F, axis=1)


class _UniformSpline:
    """A scipy CubicSpline on uniform nodes, evaluated by direct indexing instead of a search."""

    def __init__(self, spline):
        self.x0 = spline.x[0]
        self.step = spline.x[1] - spline.x[0]
        self.last = len(spline.x) - 2
        self.coefficients = np.ascontiguousarray(np.moveaxis(spline.c, 0, 1))  # [segment, 4, ncol]

    def __call__(self, x):
        x = np.asarray(x, dtype=float)
        flat = x.reshape(-1)
        i = np.clip(((flat - self.x0) / self.step).astype(np.intp), 0, self.last)
        dx = (flat - (self.x0 + i * self.step))[:, None]
        c = self.coefficients[i]
        y = ((c[:, 0] * dx + c[:, 1]) * dx + c[:, 2]) * dx + c[:, 3]
        return y.reshape(x.shape + (c.shape[-1],))


@lru_cache(maxsize=1)
def _rosseland_factors():
    """Cubic spline in ln T of the four mean absorption factors, and the hydrogenic constant.

    Returns
    -------
    spline : _UniformSpline
        ln T -> [..., 4]: ln of the level-sum factors of H (H+ + e), He I (He+ + e)
        and He II (He++ + e), and ln of the Rosseland-weighted mean H-minus
        bound-free cross-section in cm^2.
    k_hydrogenic : float, cm^5 K^3.5
        kappa_ff = k_hydrogenic z^2 n_e n_ion T^-3.5 / rho for Gaunt factor 1
        (3.77e22 (1 + X)(1 - Z) rho T^-3.5 for a fully ionised H-He mixture,
        as Kramers' free-free law).
    """
    x, w = _rosseland_weight()
    base = x**3 / (-np.expm1(-x)) * w  # 1/alpha_ff times the weight, up to constants
    cumulative = np.concatenate([[0.0], np.cumsum(0.5 * (base[1:] + base[:-1]) * np.diff(x))])
    i_ff = cumulative[-1]
    lnT = np.linspace(np.log(_T_RANGE[0]), np.log(_T_RANGE[1]), _N_NODES)
    kT = KT_EV * np.exp(lnT)
    columns = [
        _level_sum_factor(CHI_H / kT, 1.0, 1.0, x, cumulative, i_ff),
        # He I: ground state 1s^2 (weight 1, two electrons, 24.6 eV) recombining from He+
        # (weight 2): n = 1 term times chi_HeI / (2 chi_H); excited 1snl levels as hydrogen.
        _level_sum_factor(CHI_HE1 / kT, CHI_HE1 / (2.0 * CHI_H), CHI_H / CHI_HE1, x, cumulative, i_ff),
        _level_sum_factor(CHI_HE2 / kT, 1.0, 1.0, x, cumulative, i_ff),
    ]
    # H-minus: mean of sigma (1 - e^-x) over the Rosseland weight (an arithmetic mean: its
    # window beyond 1.64 micron is filled by the other absorbers in the sum).
    xs = x[::8]
    energy = xs[None, :] * kT[:, None] / CHI_HMINUS - 1.0
    e = np.maximum(energy, 0.0)
    sigma = 8.0 * HMINUS_PEAK * e**1.5 / (1.0 + e) ** 3
    ws = w[::8] * (-np.expm1(-xs))
    columns.append(np.maximum(np.sum(sigma * ws, axis=1) / np.sum(w[::8]), 1e-300))
    spline = _UniformSpline(CubicSpline(lnT, np.log(np.array(columns)).T))
    k_hydrogenic = (4.0 * E_CHARGE**6 / (3.0 * M_E * H_PLANCK * C)
                    * np.sqrt(2.0 * np.pi / (3.0 * K_B * M_E)) * (K_B / H_PLANCK) ** -3 / i_ff)
    return spline, k_hydrogenic


def mean_absorption_factors(T):
    """Rosseland-mean factors of the default law at temperature T.

    Parameters
    ----------
    T : array_like, K
        Evaluated at 300 K or 3e9 K outside that range.

    Returns
    -------
    ndarray [..., 4]
        Level-sum factors (bound-free + free-free over free-free, >= 1) of
        H+ + e, He+ + e and He++ + e (see :func:`_level_sum_factor`), and the
        mean H-minus bound-free cross-section in cm^2.
    """
    spline, _ = _rosseland_factors()
    with np.errstate(under="ignore"):
        return np.exp(spline(np.log(np.clip(np.asarray(T, dtype=float), *_T_RANGE))))


class IonisationState(NamedTuple):
    """Free electrons and ion fractions of an H-He-metal mixture (arrays of one shape).

    Attributes
    ----------
    n_e : ndarray, cm^-3
    n_H, n_He : ndarray, cm^-3
        Hydrogen and helium nuclei.
    n_nuc : ndarray, cm^-3
        All nuclei (the perturbers of the occupation probabilities).
    H0, H1 : ndarray
        Neutral and ionised fractions of hydrogen (H0 + H1 = 1).
    He0, He1, He2 : ndarray
        Neutral, singly and doubly ionised fractions of helium.
    """

    n_e: np.ndarray
    n_H: np.ndarray
    n_He: np.ndarray
    n_nuc: np.ndarray
    H0: np.ndarray
    H1: np.ndarray
    He0: np.ndarray
    He1: np.ndarray
    He2: np.ndarray


def ionisation_state(rho, T, X, Z, steps=NEWTON_STEPS):
    """Saha ionisation of H, He and the metals, with pressure ionisation.

    Saha equations (Saha 1920) for H, He I, He II and one lumped species of
    low-ionisation metals; the other metal electrons (Z/2 per m_u in all)
    are freed with He II.  Bound states are weighted by the hard-sphere
    occupation probability (Hummer & Mihalas 1988), which ionises the gas at
    high density.  The electron density is the root of
    n_e = sum_i n_i e_i(n_e), found by Newton steps in ln n_e from the
    harmonic mean of the weak- and full-ionisation limits; a fixed number of
    steps keeps the result a smooth function of the inputs.  Ideal,
    non-degenerate electrons.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
    steps : int
        Newton steps.

    Returns
    -------
    IonisationState
        Arrays of the broadcast shape of the inputs.
    """
    rho, T, X, Z = np.broadcast_arrays(*_arrays(rho, T, X, Z))
    rho = np.maximum(rho, _RHO_FLOOR)
    T = np.clip(T, *_T_RANGE)
    Z = np.maximum(Z, 0.0)
    with np.errstate(under="ignore"):
        n_H = np.maximum(X, 0.0) * rho / (A_H * M_U)
        n_He = np.maximum(1.0 - X - Z, 0.0) * rho / (A_HE * M_U)
        n_donor = DONORS_PER_METAL_MU * Z * rho / M_U
        n_deep = np.maximum(0.5 * Z * rho / M_U - n_donor, 0.0)
        n_nuc = n_H + n_He + Z * rho / (A_METAL * M_U)
        kT = KT_EV * T
        ln_pre = np.log(SAHA) + 1.5 * np.log(T)

        def ln_saha(chi, weight_ratio, volume):
            # ln(n_upper n_e / n_lower), weight_ratio = 2 g_upper / g_lower, with the lower
            # state's occupation probability; in logs, so that no ratio overflows
            return ln_pre + np.log(weight_ratio) - chi / kT + volume * n_nuc

        ls_H = ln_saha(CHI_H, 1.0, VOLUME_H)
        ls_1 = ln_saha(CHI_HE1, 4.0, VOLUME_HE1)
        ls_2 = ln_saha(CHI_HE2, 1.0, VOLUME_HE2)
        ls_D = ln_saha(CHI_DONOR, 1.0, VOLUME_DONOR)

        def ln(n):
            return np.log(np.maximum(n, 1e-300))

        ln_full = ln(n_H + 2.0 * n_He + n_donor + n_deep)
        ln_weak = 0.5 * np.logaddexp(np.logaddexp(ln(n_H) + ls_H, ln(n_He) + ls_1), ln(n_donor) + ls_D)
        x = -np.logaddexp(-ln_full, -ln_weak)  # ln n_e: 1/n_e = 1/n_full + 1/n_weak
        for _ in range(steps):
            y_H, _, y_D, _, f1, f2 = _stage_fractions(x, ls_H, ls_1, ls_2, ls_D)
            mean_q = f1 + 2.0 * f2
            freed = n_H * y_H + n_donor * y_D + n_He * mean_q + n_deep * f2 + 1e-300
            d_freed = -(n_H * y_H * (1.0 - y_H) + n_donor * y_D * (1.0 - y_D)
                        + n_He * (f1 + 4.0 * f2 - mean_q**2) + n_deep * f2 * (2.0 - mean_q))
            slope = d_freed / freed  # d ln(freed) / d ln n_e, in [-2, 0]
            x = x + (np.log(freed) - x) / (1.0 - slope)
        y_H, h_0, _, he_0, f1, f2 = _stage_fractions(x, ls_H, ls_1, ls_2, ls_D)
        return IonisationState(np.exp(x), n_H, n_He, n_nuc, h_0, y_H, he_0, f1, f2)


def _stage_fractions(x, ls_H, ls_1, ls_2, ls_D):
    """Ionisation fractions at ln n_e = x from the ln Saha factors.

    Returns H+ and H0, ionised donors, He0, He+ and He++ fractions.  Exponents
    are clipped at +-700, where a fraction is already 0 or 1 to machine
    precision.
    """
    d_H = np.exp(np.clip(x - ls_H, -700.0, 700.0))  # n(H0) / n(H+)
    y_D = 1.0 / (1.0 + np.exp(np.clip(x - ls_D, -700.0, 700.0)))
    he_0 = np.exp(np.clip(x - ls_1, -700.0, 700.0))  # n(He0) / n(He+)
    he_2 = np.exp(np.clip(ls_2 - x, -700.0, 700.0))  # n(He++) / n(He+)
    total = he_0 + 1.0 + he_2
    return 1.0 / (1.0 + d_H), d_H / (1.0 + d_H), y_D, he_0 / total, 1.0 / total, he_2 / total


def smooth_guillotine(rho, X):
    """Guillotine factor of the default law's metal term.

    Parameters
    ----------
    rho : array_like, g/cm^3
    X : array_like, dimensionless

    Returns
    -------
    ndarray, dimensionless, >= 1
        sqrt(1 + 8.75 rho (1 + X)) (our fit, see the module constants): 1 in
        tenuous gas, 2.0 at the base of the solar convection zone, 42 at the
        solar centre.
    """
    rho, X = _arrays(rho, X)
    return np.sqrt(1.0 + GUILLOTINE_DENSITY * np.maximum(rho, 0.0) * (1.0 + X))


def stellar_density(rho, T):
    """Density at which the default law is evaluated: rho, saturating beyond log R = 2.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K

    Returns
    -------
    ndarray, g/cm^3
        rho / (1 + (rho / rho_2)^4)^(1/4) with rho_2 = 100 (T / 1e6 K)^3 (our
        regularisation, see the module constants).
    """
    rho, T = _arrays(rho, T)
    cap = 10.0**LOG_R_MAX * (np.maximum(T, _T_RANGE[0]) / 1e6) ** 3
    with np.errstate(over="ignore", under="ignore"):
        return rho / (1.0 + (np.maximum(rho, 0.0) / cap) ** SATURATION_POWER) ** (1.0 / SATURATION_POWER)


class OpacityTerms(NamedTuple):
    """The default law's terms, cm^2/g (arrays of one shape); their sum is kappa.

    Attributes
    ----------
    scattering : electron scattering on the free electrons
    hydrogen : H bound-free (all levels) + free-free on protons
    helium : He I and He II bound-free + free-free on He+ and He++
    h_minus : H-minus bound-free
    rayleigh : Rayleigh scattering by neutral hydrogen
    metals : metal absorption (Kramers form with our calibration)
    molecules : molecular floor of cool gas
    """

    scattering: np.ndarray
    hydrogen: np.ndarray
    helium: np.ndarray
    h_minus: np.ndarray
    rayleigh: np.ndarray
    metals: np.ndarray
    molecules: np.ndarray


def default_law_terms(rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
    """Terms of the default (``combined``) opacity law.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
    g_bf : array_like, dimensionless
        Multiplies the metal term (1: our calibration).
    g_ff : array_like, dimensionless
        Gaunt factor of the hydrogen and helium absorption (bound-free and
        free-free together; 1 in the calibration).
    guillotine : array_like, dimensionless
        A value >= 1 replaces the metal term's guillotine factor
        :func:`smooth_guillotine`; below 1 (default) that factor is used.

    Returns
    -------
    OpacityTerms
        Arrays of the broadcast shape of rho, T, X, Z (the parameters may
        broadcast further in the caller).
    """
    rho, T, X, Z = np.broadcast_arrays(*_arrays(rho, T, X, Z))
    g_bf, g_ff, guillotine = _arrays(g_bf, g_ff, guillotine)
    rho = stellar_density(rho, T)
    state = ionisation_state(rho, T, X, Z)
    _, k_hydrogenic = _rosseland_factors()
    r = np.maximum(rho, _RHO_FLOOR)
    T = np.clip(T, *_T_RANGE)
    lnT = np.log(T)
    factors = mean_absorption_factors(T)
    with np.errstate(under="ignore"):
        n_e = state.n_e
        free_free = g_ff * k_hydrogenic * n_e * T**-3.5 / r
        scattering = SIGMA_T * n_e / r * hot_scattering_factor(r, T)
        hydrogen = free_free * state.n_H * state.H1 * factors[..., 0]
        helium = free_free * state.n_He * (state.He1 * factors[..., 1] + 4.0 * state.He2 * factors[..., 2])
        # Saha equation for H-: n(H-) = n(H) n_e (g(H-) / (2 g(H))) Lambda^3 e^(0.754 eV/kT),
        # times its occupation probability (exclusion diameter 8.5 a0 against 2 a0 for H)
        ln_ratio = (np.log(n_e) - np.log(4.0 * SAHA) - 1.5 * lnT + CHI_HMINUS / (KT_EV * T)
                    - VOLUME_HMINUS * state.n_nuc)
        h_minus_ = state.n_H * state.H0 * np.exp(np.minimum(ln_ratio, 0.0)) * factors[..., 3] / r
        sigma_rayleigh = RAYLEIGH_T4 * T**4
        rayleigh = state.n_H * state.H0 * sigma_rayleigh * SIGMA_T / (sigma_rayleigh + SIGMA_T) / r
        t = np.where(guillotine >= 1.0, guillotine, smooth_guillotine(r, X))
        metals = (g_bf * METAL_LINE_FACTOR * KRAMERS_BF * Z * (2.0 * M_U * n_e) * T**-3.5
                  * np.sqrt(state.He1 + state.He2) / t)
        molecules = MOLECULAR_PER_Z * np.maximum(Z, 0.0) / (1.0 + (T / MOLECULAR_T) ** MOLECULAR_POWER)
    return OpacityTerms(scattering, hydrogen, helium, h_minus_, rayleigh, metals, molecules)


def default_kappa(rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
    """The default (``combined``) law: the sum of :func:`default_law_terms`, cm^2/g, broadcasting."""
    return sum(default_law_terms(rho, T, X, Z, g_bf, g_ff, guillotine))
