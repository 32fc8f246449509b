"""Hydrogen burning: energy generation of the pp chain and the CNO cycle.

Non-resonant thermonuclear rates at the Gamow peak with the S-factor
corrections (Clayton 1968, *Principles of Stellar Evolution and
Nucleosynthesis*, ch. 4; Kippenhahn, Weigert & Weiss 2012, *Stellar Structure
and Evolution*, ch. 18) and the S-factors of Adelberger et al. 2011 (SF-II);
3He and 7Be in equilibrium for the pp-chain branches, CN equilibrium for the
CNO cycle (run by 14N(p,gamma)15O); Salpeter (1954) weak screening joined to
ion-sphere strong screening.  ``nuclear_rates`` is the entry point; its
docstring gives the formulas and the approximations.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from radwalk.constants import E_CHARGE, H_PLANCK, K_B, M_E, M_U, MEV, N_A, C

# ---------------------------------------------------------------------------
# Nuclear data
# ---------------------------------------------------------------------------

# Atomic mass excesses, MeV (Atomic Mass Evaluation 2016, from memory, to ~1 keV).
MASS_EXCESS = {
    "1H": 7.28897,
    "2H": 13.13572,
    "3He": 14.93122,
    "4He": 2.42492,
    "7Li": 14.90710,
    "7Be": 15.76900,
    "8B": 22.92150,
    "12C": 0.0,
    "13C": 3.12501,
    "13N": 5.34548,
    "14N": 2.86342,
    "15N": 0.10144,
    "15O": 2.85561,
}
_CHARGE = {"1H": 1, "3He": 2, "4He": 2, "7Be": 4, "14N": 7}
_MASS_NUMBER = {"1H": 1, "3He": 3, "4He": 4, "7Be": 7, "14N": 14}

U_MEV = M_U * C**2 / MEV  # atomic mass unit, MeV
_ME_U = M_E / M_U  # electron mass, u


def _atomic_mass(nuc):
    """Atomic mass in u."""
    return _MASS_NUMBER[nuc] + MASS_EXCESS[nuc] / U_MEV


def _nuclear_mass(nuc):
    """Bare-nucleus mass in u (electron binding energies neglected)."""
    return _atomic_mass(nuc) - _CHARGE[nuc] * _ME_U


def _q_value(initial, final):
    """Q value in MeV from atomic mass excesses.

    With atomic masses the electron bookkeeping is automatic: a positron's
    annihilation energy and a captured electron's rest mass are included.
    """
    return sum(MASS_EXCESS[n] for n in initial) - sum(MASS_EXCESS[n] for n in final)


A_H = _atomic_mass("1H")  # atomic mass of hydrogen, u (X counts hydrogen atoms)
A_HE4 = _atomic_mass("4He")
A_N14 = 14.0 + MASS_EXCESS["14N"] / U_MEV

# Q values, MeV (atomic masses, positron annihilation included).
Q_PP = _q_value(["1H", "1H"], ["2H"])  # p + p -> d + e+ + nu: 1.442
Q_PD = _q_value(["2H", "1H"], ["3He"])  # d + p -> 3He + gamma: 5.493
Q_33 = _q_value(["3He", "3He"], ["4He", "1H", "1H"])  # 12.860
Q_34 = _q_value(["3He", "4He"], ["7Be"])  # 1.587
Q_BE7_EC = _q_value(["7Be"], ["7Li"])  # 7Be + e- -> 7Li + nu: 0.862
Q_LI7_P = _q_value(["7Li", "1H"], ["4He", "4He"])  # 17.346
Q_BE7_P = _q_value(["7Be", "1H"], ["8B"])  # 0.137
Q_B8_DECAY = _q_value(["8B"], ["4He", "4He"])  # 8B -> 8Be* + e+ + nu -> 2 alpha: 18.07
Q_HYDROGEN_BURNING = _q_value(["1H"] * 4, ["4He"])  # 4 1H -> 4He: 26.731

# Mean neutrino energies, MeV (Bahcall 1989, *Neutrino Astrophysics*, from memory;
# 8B from Bahcall et al. 1996, Phys. Rev. C 54, 411, from memory).
NU_PP = 0.265
# 7Be capture: 0.862 MeV line to the 7Li ground state, 0.384 MeV line to the
# 478 keV state in 10.3 % of captures (from memory).
NU_BE7 = 0.897 * 0.862 + 0.103 * 0.384
NU_B8 = 6.735
NU_N13 = 0.707
NU_O15 = 0.997

# Energy left in the star per event, MeV.
_E_PP_PD = Q_PP + Q_PD - NU_PP  # p + p followed by d + p
_E_PPII_TAIL = Q_34 + Q_BE7_EC - NU_BE7 + Q_LI7_P  # 3He + 4He ... -> 2 4He via 7Be(e, nu)
_E_PPIII_TAIL = Q_34 + Q_BE7_P + Q_B8_DECAY - NU_B8  # 3He + 4He ... -> 2 4He via 8B
E_CNO_CYCLE = Q_HYDROGEN_BURNING - NU_N13 - NU_O15  # 25.03 MeV per cycle

# Energy deposited per 4He made, per branch, MeV (26.20, 25.65, 19.73, 25.03).
E_PPI = Q_HYDROGEN_BURNING - 2 * NU_PP
E_PPII = Q_HYDROGEN_BURNING - NU_PP - NU_BE7
E_PPIII = Q_HYDROGEN_BURNING - NU_PP - NU_B8


class Reaction(NamedTuple):
    """S-factor expansion of a non-resonant reaction.

    S0 in MeV b; S1 = S'(0) in b (MeV b per MeV); S2 = S''(0) in b/MeV.
    """

    name: str
    target: str
    projectile: str
    S0: float
    S1: float
    S2: float
    source: str


# Adelberger et al. 2011 (SF-II), Rev. Mod. Phys. 83, 195, all from memory.
REACTIONS = (
    Reaction("p+p", "1H", "1H", 4.01e-25, 11.2 * 4.01e-25, 0.0,
             "SF-II: S(0) = 4.01e-25 MeV b (+-1 %), S'/S = 11.2 /MeV; S'' omitted"),
    Reaction("3He+3He", "3He", "3He", 5.21, -4.49, 22.6,
             "SF-II: S(0) = 5.21 MeV b (+-5 %), S' = -4.49 b, S'' = 22.6 b/MeV"),
    Reaction("3He+4He", "3He", "4He", 0.56e-3, -0.580 * 0.56e-3, 0.289 * 0.56e-3,
             "SF-II: S(0) = 0.56 keV b (+-5 %), S'/S = -0.580 /MeV, S''/S = 0.289 /MeV^2"),
    Reaction("7Be+p", "7Be", "1H", 20.8e-6, 0.0, 0.0,
             "SF-II: S(0) = 20.8 eV b (+-8 %); energy dependence omitted"),
    Reaction("14N+p", "14N", "1H", 1.66e-3, -3.3e-3, 4.4e-2,
             "SF-II: S(0) = 1.66 keV b (+-7 %), S' = -3.3e-3 b, S'' = 4.4e-5 b/keV (less certain)"),
)
_INDEX = {r.name: i for i, r in enumerate(REACTIONS)}
_PP, _33, _34, _17, _N14 = (_INDEX[n] for n in ("p+p", "3He+3He", "3He+4He", "7Be+p", "14N+p"))

# 7Be + e- capture: lambda = 5.60e-9 (rho/mu_e) T6^-1/2 [1 + 0.004 (T6 - 16)] s^-1
# (Adelberger et al. 2011, from memory; bound and continuum electrons, ~2 %).
BE7_CAPTURE_COEFF = 5.60e-9

# ---------------------------------------------------------------------------
# Solar metal mix: Asplund, Grevesse, Sauval & Scott 2009, ARA&A 47, 481,
# photospheric log eps (log N/N_H + 12), from memory: (element, Z, A, log eps).
# ---------------------------------------------------------------------------
SOLAR_MIX_A09 = (
    ("C", 6, 12.011, 8.43), ("N", 7, 14.007, 7.83), ("O", 8, 15.999, 8.69),
    ("Ne", 10, 20.180, 7.93), ("Na", 11, 22.990, 6.24), ("Mg", 12, 24.305, 7.60),
    ("Al", 13, 26.982, 6.45), ("Si", 14, 28.085, 7.51), ("P", 15, 30.974, 5.41),
    ("S", 16, 32.06, 7.12), ("Cl", 17, 35.45, 5.50), ("Ar", 18, 39.948, 6.40),
    ("K", 19, 39.098, 5.03), ("Ca", 20, 40.078, 6.34), ("Ti", 22, 47.867, 4.95),
    ("Cr", 24, 51.996, 5.64), ("Mn", 25, 54.938, 5.43), ("Fe", 26, 55.845, 7.50),
    ("Co", 27, 58.933, 4.99), ("Ni", 28, 58.693, 6.22),
)


def _mix_fractions():
    n = {el: 10.0 ** (le - 12.0) for el, _, _, le in SOLAR_MIX_A09}
    mass = {el: n[el] * a for el, _, a, _ in SOLAR_MIX_A09}
    total = sum(mass.values())
    x = {el: m / total for el, m in mass.items()}  # mass fraction within Z
    charge = {el: z for el, z, _, _ in SOLAR_MIX_A09}
    amass = {el: a for el, _, a, _ in SOLAR_MIX_A09}
    zeta2 = sum(x[el] * (charge[el] ** 2 + charge[el]) / amass[el] for el in x)
    ye = sum(x[el] * charge[el] / amass[el] for el in x)
    n14_cn = A_N14 * (x["C"] / amass["C"] + x["N"] / amass["N"])
    n14_cno = n14_cn + A_N14 * x["O"] / amass["O"]
    return n14_cn, n14_cno, zeta2, ye


# 14N mass fraction per unit Z when all C and N nuclei of the A09 mix sit in
# 14N (CN equilibrium; 0.257) or when O has been processed as well (0.63).
N14_FRACTION_OF_Z, N14_FRACTION_OF_Z_WITH_O, _METAL_ZETA2, _METAL_YE = _mix_fractions()

# ---------------------------------------------------------------------------
# Reaction constants (arrays over REACTIONS)
# ---------------------------------------------------------------------------
ALPHA_FS = 2.0 * np.pi * E_CHARGE**2 / (H_PLANCK * C)  # fine-structure constant


def _reaction_constants():
    z1 = np.array([_CHARGE[r.target] for r in REACTIONS], float)
    z2 = np.array([_CHARGE[r.projectile] for r in REACTIONS], float)
    m1 = np.array([_nuclear_mass(r.target) for r in REACTIONS])
    m2 = np.array([_nuclear_mass(r.projectile) for r in REACTIONS])
    mu = m1 * m2 / (m1 + m2) * M_U  # reduced mass, g
    e_gamow = 2.0 * mu * C**2 * (np.pi * ALPHA_FS * z1 * z2) ** 2  # erg
    tau_coeff = 3.0 * (e_gamow / (4.0 * K_B)) ** (1.0 / 3.0)  # tau = tau_coeff T^(-1/3)
    barn_mev = 1e-24 * MEV  # 1 MeV b in erg cm^2
    s0 = np.array([r.S0 for r in REACTIONS]) * barn_mev
    a1 = np.array([r.S1 / r.S0 for r in REACTIONS]) / MEV  # 1/erg
    a2 = np.array([0.5 * r.S2 / r.S0 for r in REACTIONS]) / MEV**2  # 1/erg^2
    pref = 8.0 / (3.0 * np.sqrt(27.0) * np.pi * ALPHA_FS * C * mu * z1 * z2) * s0  # cm^3/s
    f53 = (z1 + z2) ** (5 / 3) - z1 ** (5 / 3) - z2 ** (5 / 3)
    return z1, z2, mu, e_gamow, tau_coeff, a1, a2, pref, f53


_Z1, _Z2, _MU, _E_GAMOW, _TAU_COEFF, _A1, _A2, _PREF, _F53 = _reaction_constants()
_Z1Z2 = _Z1 * _Z2


def _s_polynomial():
    """S_eff / S(0) as a polynomial in t = T^(1/3): sum_m B[:, m] t^m.

    With tau = c / t, kT = k t^3 and E0 = tau kT / 3 = c k t^2 / 3 the terms
    1, 5/(12 tau), a1 E0, a1 35 kT/36, a2 E0^2, a2 89 E0 kT/36 are powers
    t^0 ... t^5; d/dlnT multiplies t^m by m/3.
    """
    c, k = _TAU_COEFF, K_B
    b = np.zeros((len(REACTIONS), 6))
    b[:, 0] = 1.0
    b[:, 1] = 5.0 / (12.0 * c)
    b[:, 2] = _A1 * c * k / 3.0
    b[:, 3] = _A1 * 35.0 / 36.0 * k
    b[:, 4] = _A2 * (c * k / 3.0) ** 2
    b[:, 5] = _A2 * 89.0 / 36.0 * (c * k / 3.0) * k
    return b, b * (np.arange(6) / 3.0)


_S_POLY, _S_POLY_DLNT = _s_polynomial()

# Weak-screening constant: e^3 sqrt(4 pi N_A) / k^(3/2); H_w = Z1 Z2 WEAK * sqrt(rho zeta2) T^-1.5
_WEAK = E_CHARGE**3 * np.sqrt(4.0 * np.pi * N_A) / K_B**1.5  # 0.188 at T6 = 1
_STRONG_ION_SPHERE = 0.9  # Salpeter 1954 ion-sphere coefficient
_GAMMA_WEAK, _GAMMA_STRONG = 0.1, 1.0  # ends of the blend (our choice, no source)
# Guard far outside VALIDITY: H > 100 would be pycnonuclear burning, not modelled here;
# capping keeps exp(H) finite (reached only at Gamma_e ~ 20 for 14N + p).
H_MAX = 100.0

T_OFF, T_ON = 1.0e6, 2.0e6  # burning switched off below T_OFF, full above T_ON, K

VALIDITY = {
    "T": (5.0e6, 5.0e7),
    "rho": (0.0, 1.0e3),
    "X": (0.0, 1.0),
    "Z": (0.0, 0.05),
    "note": (
        "hydrogen burning only (no helium burning, no hot CNO); 3He, 7Be and CN nuclei "
        "in equilibrium, which takes longer than ~1 Gyr below ~7e6 K (3He) and ~1.1e7 K "
        "(12C into 14N), so there the rate is that of the finished chain, not of a young star; "
        "CNO from 14N(p,gamma) alone: above ~5e7 K the 259 keV resonance, the ON cycle and "
        "the 15N branch matter; weak screening trusted for Gamma_e < 0.1 (e.g. rho < ~300 "
        "g/cm^3 at 1.5e7 K, < ~10 g/cm^3 at 5e6 K), strong above Gamma_e = 1, our own "
        "blend between, electrons taken as non-degenerate; rates tapered to exactly 0 "
        "between 2e6 and 1e6 K"
    ),
}


class NuclearRates(NamedTuple):
    """Hydrogen-burning rates, arrays of the broadcast input shape.

    eps_pp, eps_cno, eps : erg/(g s), energy left in the gas (neutrinos removed).
    eps_nu : erg/(g s), energy carried off by neutrinos.
    dXdt : 1/s, rate of change of the hydrogen mass fraction (<= 0).
    nu_T : dimensionless, d ln eps / d ln T at fixed rho and composition.
    """

    eps_pp: np.ndarray
    eps_cno: np.ndarray
    eps: np.ndarray
    eps_nu: np.ndarray
    dXdt: np.ndarray
    nu_T: np.ndarray


class PPBranches(NamedTuple):
    """Fractions of pp-chain terminations (4He made) through ppI, ppII, ppIII."""

    ppI: np.ndarray
    ppII: np.ndarray
    ppIII: np.ndarray


class GamowPeak(NamedTuple):
    """Gamow peak of a reaction: E0 and width Delta (erg), tau = 3 E0 / kT."""

    E0: np.ndarray
    Delta: np.ndarray
    tau: np.ndarray


def _smootherstep(s):
    """6s^5 - 15s^4 + 10s^3 on [0, 1] and its derivative (s clipped)."""
    s = np.clip(s, 0.0, 1.0)
    return s**3 * (s * (6.0 * s - 15.0) + 10.0), 30.0 * s**2 * (1.0 - s) ** 2


def _reaction_index(reaction):
    try:
        return _INDEX[reaction]
    except KeyError:
        raise ValueError(f"unknown reaction {reaction!r}; known: {', '.join(_INDEX)}") from None


def gamow_peak(T, reaction="p+p"):
    """Gamow peak energy and width of a reaction.

    Parameters
    ----------
    T : array_like, K
        Temperature (positive).
    reaction : str
        One of the names in ``REACTIONS`` ("p+p", "3He+3He", "3He+4He", "7Be+p", "14N+p").

    Returns
    -------
    GamowPeak
        E0 = (E_G (kT)^2 / 4)^(1/3) in erg, the 1/e full width
        Delta = 4 (E0 kT / 3)^(1/2) in erg and tau = 3 E0 / kT (Clayton 1968, ch. 4).
    """
    j = _reaction_index(reaction)
    kT = K_B * np.asarray(T, dtype=float)
    e0 = np.cbrt(_E_GAMOW[j] * kT**2 / 4.0)
    return GamowPeak(e0, 4.0 * np.sqrt(e0 * kT / 3.0), 3.0 * e0 / kT)


def rate_coefficient(T, reaction="p+p"):
    """Unscreened non-resonant rate coefficient <sigma v> of one reaction.

    Parameters
    ----------
    T : array_like, K
        Temperature (positive, >= ~1e5 K to stay clear of underflow).
    reaction : str
        One of the names in ``REACTIONS``.

    Returns
    -------
    ndarray, cm^3/s
        <sigma v> with the S-factor expansion and the 5/(12 tau) term.
    """
    j = _reaction_index(reaction)
    t = np.cbrt(np.asarray(T, dtype=float))
    tau = _TAU_COEFF[j] / t
    s_eff = np.polynomial.polynomial.polyval(t, _S_POLY[j])
    with np.errstate(under="ignore"):
        return _PREF[j] * tau**2 * np.exp(-tau) * s_eff


def _plasma(rho, T, X, Y, Z):
    """Weak-screening energy per unit Z1 Z2 and the electron coupling Gamma_e."""
    zeta2 = 2.0 * X / A_H + 6.0 * Y / A_HE4 + _METAL_ZETA2 * Z  # sum (Z^2 + Z) X_i / A_i
    ye = X / A_H + 2.0 * Y / A_HE4 + _METAL_YE * Z  # 1 / mu_e
    h_weak = _WEAK * np.sqrt(rho * zeta2) / (T * np.sqrt(T))
    gamma_e = E_CHARGE**2 * np.cbrt(4.0 * np.pi / 3.0 * N_A * rho * ye) / (K_B * T)
    return h_weak, gamma_e, ye


def _blend_correction(h_weak, gamma_e):
    """Change of H and of dH/dlnT [5, n] from the weak-screening value, or None.

    Nonzero only where Gamma_e > 0.1: there ln H = (1 - w) ln H_w + w ln H_s,
    i.e. H = H_w (H_s / H_w)^w, with w rising smoothly from 0 at Gamma_e = 0.1
    to 1 at Gamma_e = 1.
    """
    blend = gamma_e > _GAMMA_WEAK
    if not np.any(blend):
        return None
    span = np.log(_GAMMA_STRONG / _GAMMA_WEAK)
    w, dw_ds = _smootherstep(np.log(np.where(blend, gamma_e, _GAMMA_WEAK) / _GAMMA_WEAK) / span)
    # ln(H_s / H_w) = ln(0.9 F53 / (Z1 Z2)) + ln(Gamma_e / h_weak); h_weak > 0 where blend.
    lr = np.log(_STRONG_ION_SPHERE * _F53 / _Z1Z2)[:, None] + np.log(
        np.where(blend, gamma_e, 1.0) / np.where(blend, h_weak, 1.0))
    hw = _Z1Z2[:, None] * h_weak
    h = hw * np.exp(w * lr)
    # d ln H_w / d ln T = -3/2, d ln(H_s / H_w) / d ln T = +1/2, d w / d ln T = -w'(s) / span.
    dh = np.where(h < H_MAX, h * (-1.5 + 0.5 * w - dw_ds / span * lr), 0.0)
    h = np.minimum(h, H_MAX)
    return np.where(blend, h - hw, 0.0), np.where(blend, dh + 1.5 * hw, 0.0)


def screening_factor(rho, T, X, Z, reaction="p+p"):
    """Electron-screening enhancement f = exp(H) of one reaction.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless
        Hydrogen and metal mass fractions (Y = 1 - X - Z; A09 metal mix).
    reaction : str
        One of the names in ``REACTIONS``.

    Returns
    -------
    ndarray, dimensionless
        Weak screening (Salpeter 1954) for Gamma_e <= 0.1, ion-sphere strong
        screening (Salpeter 1954) for Gamma_e >= 1, geometric blend between.
    """
    j = _reaction_index(reaction)
    rho, T, X, Z = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (rho, T, X, Z)))
    X = np.clip(X, 0.0, 1.0)
    Z = np.clip(Z, 0.0, 1.0)
    Y = np.clip(1.0 - X - Z, 0.0, 1.0)
    shape = rho.shape
    hw, ge, _ = _plasma(np.maximum(rho, 0.0).ravel(), np.maximum(T, 1.0).ravel(), X.ravel(), Y.ravel(), Z.ravel())
    h = _Z1Z2[j] * hw
    corr = _blend_correction(hw, ge)
    if corr is not None:
        h = h + corr[0][j]
    return np.exp(h).reshape(shape)


_TINY = 1e-300
_RATE_CONST = _PREF * _TAU_COEFF**2  # PREF c^2, cm^3/s K^(2/3)
# Per reaction a [2, 6] block: S_eff / S(0) and d(S_eff / S(0)) / d ln T from [t^0 .. t^5].
_S_BLOCKS = tuple(np.stack([_S_POLY[j], _S_POLY_DLNT[j]]) for j in range(len(REACTIONS)))


def _screened_rate(j, t_pow, inv_t, h_weak, corr):
    """<sigma v> (cm^3/s) of reaction j and its d ln / d ln T, flat [n] arrays.

    <sv> = PREF tau^2 exp(H - tau) S_eff with tau = c / t, t = T^(1/3).  The
    reactions are done one at a time on [n] arrays, which keeps temporaries
    small (cheaper than [5, n] blocks at n ~ 4000).
    """
    tau = _TAU_COEFF[j] * inv_t
    h = _Z1Z2[j] * h_weak
    nu = -1.5 * h
    if corr is not None:
        h += corr[0][j]
        nu += corr[1][j]
    s_eff, ds_eff = _S_BLOCKS[j] @ t_pow
    sv = np.exp(h - tau)
    sv *= inv_t
    sv *= inv_t
    sv *= s_eff
    sv *= _RATE_CONST[j]
    nu += tau / 3.0
    nu += ds_eff / s_eff
    nu -= 2.0 / 3.0
    return sv, nu


def _burn(rho, T, X, Z, x_n14, branches=False):
    """All rates on flat float arrays [n]; returns a dict of flat arrays."""
    X = np.minimum(np.maximum(X, 0.0), 1.0)
    Z = np.minimum(np.maximum(Z, 0.0), 1.0)
    Y = np.maximum(1.0 - X - Z, 0.0)
    rho = np.maximum(rho, 0.0)
    Te = np.maximum(T, T_OFF)  # below T_OFF the taper is 0; evaluate at T_OFF to stay finite

    # Taper between T_OFF and T_ON (smooth, C^2) and its d ln / d ln T.
    if np.any(T < T_ON):
        span = np.log(T_ON / T_OFF)
        taper, dtaper = _smootherstep(np.log(Te / T_OFF) / span)
        taper = np.where(T > T_OFF, taper, 0.0)
        dln_taper = dtaper / span / np.maximum(taper, _TINY)
    else:
        taper, dln_taper = 1.0, 0.0

    # Screened rate coefficients, reaction by reaction; t_pow = [t^0 .. t^5], t = T^(1/3).
    t_pow = np.empty((6, Te.size))
    t_pow[0] = 1.0
    np.cbrt(Te, out=t_pow[1])
    for m in range(2, 6):
        np.multiply(t_pow[m - 1], t_pow[1], out=t_pow[m])
    inv_t = 1.0 / t_pow[1]
    h_weak, gamma_e, ye = _plasma(rho, Te, X, Y, Z)
    corr = _blend_correction(h_weak, gamma_e)
    (sv_pp, nu_pp_r), (sv_33, nu_33), (sv_34, nu_34), (sv_17, nu_17), (sv_14, nu_14) = (
        _screened_rate(j, t_pow, inv_t, h_weak, corr) for j in (_PP, _33, _34, _17, _N14))

    n_p = (N_A / A_H) * rho * X
    n_4 = (N_A / A_HE4) * rho * Y
    x14 = N14_FRACTION_OF_Z * Z if x_n14 is None else np.minimum(np.maximum(x_n14, 0.0), 1.0)
    n_14 = (N_A / A_N14) * rho * x14

    # pp chain: r_pp = n_p^2 <sv>/2 reactions per cm^3 per s.  The 3He balance
    # r_pp = alpha n3^2 + beta n3 gives the fraction phi of p + p reactions whose
    # 3He ends in 3He + 4He: phi = 2 q / (1 + q), q = beta / sqrt(beta^2 + 4 alpha r_pp).
    r_pp = 0.5 * n_p * n_p * sv_pp
    beta = n_4 * sv_34
    q = beta / np.maximum(np.sqrt(beta * beta + 4.0 * sv_33 * r_pp), _TINY)
    phi = 2.0 * q / (1.0 + q)
    dphi = (q * (q - 1.0) / (1.0 + q)) * (nu_33 + nu_pp_r - 2.0 * nu_34)

    # 7Be: electron capture (ppII) against proton capture (ppIII).
    # lambda_e = 5.60e-9 (rho/mu_e) T6^-1/2 [1 + 0.004 (T6 - 16)] = 2.24e-11 rho/mu_e (T6 + 234) / T6^1/2
    t6 = Te * 1e-6
    lam_e = (0.004 * BE7_CAPTURE_COEFF) * rho * ye * (t6 + 234.0) / np.sqrt(t6)
    lam_p = n_p * sv_17
    f_e = lam_e / np.maximum(lam_e + lam_p, _TINY)
    df_e = f_e * (1.0 - f_e) * (t6 / (t6 + 234.0) - 0.5 - nu_17)

    tail = _E_PPIII_TAIL + f_e * (_E_PPII_TAIL - _E_PPIII_TAIL)  # MeV per 3He + 4He
    e_per_pp = (_E_PP_PD + 0.5 * Q_33) + phi * (tail - 0.5 * Q_33)  # MeV per p + p
    de_per_pp = (tail - 0.5 * Q_33) * dphi + phi * (_E_PPII_TAIL - _E_PPIII_TAIL) * df_e
    nu_loss_pp = NU_PP + phi * (NU_B8 + f_e * (NU_BE7 - NU_B8))

    per_gram = taper / np.maximum(rho, _TINY)
    r_pp_g = r_pp * per_gram
    r_cno_g = (n_p * n_14 * sv_14) * per_gram  # CN cycles per g per s
    eps_pp = MEV * e_per_pp * r_pp_g
    eps_cno = (MEV * E_CNO_CYCLE) * r_cno_g
    eps = eps_pp + eps_cno
    eps_nu = MEV * (nu_loss_pp * r_pp_g + (NU_N13 + NU_O15) * r_cno_g)
    # 4 protons per 4He: the pp chain makes (1 + phi)/2 4He per p + p reaction, CNO one per cycle.
    dXdt = (-4.0 * A_H * M_U) * (0.5 * (1.0 + phi) * r_pp_g + r_cno_g)

    nu_pp = nu_pp_r + de_per_pp / e_per_pp
    nu_T = nu_pp + (nu_14 - nu_pp) * (eps_cno / np.maximum(eps, _TINY)) + np.where(eps > 0, dln_taper, 0.0)
    out = {"eps_pp": eps_pp, "eps_cno": eps_cno, "eps": eps, "eps_nu": eps_nu, "dXdt": dXdt, "nu_T": nu_T}
    if branches:
        made = 0.5 * (1.0 + phi)  # 4He per p + p
        out["ppI"] = 0.5 * (1.0 - phi) / made
        out["ppII"] = phi * f_e / made
        out["ppIII"] = phi * (1.0 - f_e) / made
    return out


def _evaluate(rho, T, X, Z, x_n14, branches=False):
    arrays = [np.asarray(a, dtype=float) for a in (rho, T, X, Z)]
    if x_n14 is not None:
        arrays.append(np.asarray(x_n14, dtype=float))
    arrays = np.broadcast_arrays(*arrays)
    shape = arrays[0].shape
    flat = [np.ravel(a) for a in arrays]
    with np.errstate(over="ignore", under="ignore"):
        out = _burn(*flat[:4], flat[4] if x_n14 is not None else None, branches)
    return {k: v.reshape(shape) for k, v in out.items()}


def nuclear_rates(rho, T, X, Z, *, x_n14=None) -> NuclearRates:
    """Energy generation and hydrogen consumption by the pp chain and the CNO cycle.

    Parameters
    ----------
    rho : array_like, g/cm^3
        Density.
    T : array_like, K
        Temperature.
    X : array_like, dimensionless
        Hydrogen mass fraction.
    Z : array_like, dimensionless
        Metal mass fraction (Y = 1 - X - Z); sets the 14N abundance and the
        metals' share of the screening charge (A09 solar mix).
    x_n14 : array_like, dimensionless, optional
        14N mass fraction of the CN catalysts.  Default ``N14_FRACTION_OF_Z * Z``:
        all C and N of the A09 mix in 14N (CN equilibrium, as at the centre of
        the present Sun).  Pass ``N14_FRACTION_OF_Z_WITH_O * Z`` where oxygen
        has been cycled too (old cores hotter than ~2.5e7 K).

    Returns
    -------
    NuclearRates
        Arrays of the broadcast shape of the inputs.  Exactly 0 where
        T <= 1e6 K, rho <= 0 or X = 0; never NaN.  ``nu_T`` is the
        eps-weighted exponent of the two chains; where eps = 0 it is the
        pp-chain exponent at max(T, 1e6 K).

    Notes
    -----
    Each rate coefficient is the non-resonant formula (Clayton 1968, ch. 4;
    correction terms of Fowler, Caughlan & Zimmerman 1967, ARA&A 5, 525)::

        <sigma v> = 8 / (3 sqrt(27) pi alpha c mu Z1 Z2) tau^2 exp(-tau) S_eff
        tau = 3 E0 / kT,  E0 = (E_G (kT)^2 / 4)^(1/3),  E_G = 2 mu c^2 (pi alpha Z1 Z2)^2
        S_eff = S(0) [1 + 5/(12 tau)] + S'(0) (E0 + 35 kT/36) + S''(0)/2 (E0^2 + 89 E0 kT/36)

    times the screening factor exp(H).  The pp chain runs at the p + p rate
    r_pp = n_p^2 <sv>_11 / 2; the 3He balance r_pp = n3^2 <sv>_33 + n3 n4 <sv>_34
    splits it into ppI (3He + 3He) and ppII/III (3He + 4He), and 7Be then
    captures an electron (ppII; rate of Adelberger et al. 2011 after Bahcall
    & Moeller 1969) or a proton (ppIII).  CNO: all C and N nuclei sit in 14N
    and one cycle runs per 14N(p,gamma)15O (the 12C share at equilibrium is
    ~0.3 % at 1.5e7 K, neglected).  Energy per step is its Q value (atomic
    mass excesses) less the mean neutrino energy.  Screening: weak
    (Salpeter 1954, Debye-Hueckel, electrons non-degenerate) for
    Gamma_e = e^2 / (a_e kT) <= 0.1, ion-sphere strong screening (Salpeter
    1954; coefficient 0.9 as in Kippenhahn, Weigert & Weiss 2012, sect. 18.4)
    for Gamma_e >= 1, and between them ln H blended smoothly in ln Gamma_e
    (our own interpolation, not a published one; the intermediate formula of
    Graboske et al. 1973 is not used).  Rates are tapered smoothly to exactly
    0 between 2e6 K and 1e6 K (below 2e6 K they are < 1e-5 erg/g/s at
    rho <= 100 g/cm^3), so envelope points carry no burning and nothing
    underflows.

    Outside ``VALIDITY`` the numbers stay finite and smooth but lose accuracy:
    the screening above Gamma_e = 0.1 is an interpolation, the equilibria
    assumed for 3He and CN need > 1 Gyr below ~7e6 K and ~1.1e7 K (where
    3He has not yet built up, ppI releases half its energy: the rate here is
    up to 2x too high), and resonances and the hot CNO cycle are missing above
    ~5e7 K.  The pep reaction (0.2 % of p + p in the Sun), hep, the 15N(p,gamma)
    leak to the ON cycle and electron degeneracy in the screening are
    neglected.
    """
    out = _evaluate(rho, T, X, Z, x_n14)
    return NuclearRates(*(out[k] for k in NuclearRates._fields))


def pp_branches(rho, T, X, Z) -> PPBranches:
    """Fractions of pp-chain terminations through ppI, ppII and ppIII.

    Parameters
    ----------
    rho : array_like, g/cm^3
    T : array_like, K
    X, Z : array_like, dimensionless

    Returns
    -------
    PPBranches
        ppI + ppII + ppIII = 1, each counting 4He nuclei made by that branch
        (3He and 7Be in equilibrium).
    """
    out = _evaluate(rho, T, X, Z, None, branches=True)
    return PPBranches(out["ppI"], out["ppII"], out["ppIII"])


def energy_per_hydrogen_mass(branch):
    """Energy left in the star per gram of hydrogen burnt by one branch.

    Parameters
    ----------
    branch : str
        "ppI", "ppII", "ppIII" or "CNO".

    Returns
    -------
    float, erg/g
        (26.731 MeV - neutrino losses) / (4 m_H).
    """
    e = {"ppI": E_PPI, "ppII": E_PPII, "ppIII": E_PPIII, "CNO": E_CNO_CYCLE}[branch]
    return e * MEV / (4.0 * A_H * M_U)
