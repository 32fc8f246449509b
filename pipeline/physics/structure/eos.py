"""Equation of state: ideal ions, partially degenerate electrons, radiation and Saha ionisation.

Everything follows from one Helmholtz free energy per gram,

    F = F_e + F_ions + F_rad + F_bound,

so that P, u and all their derivatives are thermodynamically consistent
(Kippenhahn, Weigert & Weiss 2012, *Stellar Structure and Evolution*, 2nd ed.,
ch. 4, 13-16; Cox & Giuli 1968, ch. 9 and 15).

Electrons
    The pressure of the electron gas is the smooth approximation of Eggleton,
    Faulkner & Flannery (1973, A&A 23, 325; "EFF") as a function of their
    variable f and of the temperature:

        psi = 2 sqrt(1 + f) + ln[(sqrt(1 + f) - 1) / (sqrt(1 + f) + 1)]
        g   = (k T / m_e c^2) sqrt(1 + f)
        P_e = (m_e c^2 / lambda_C^3) f g^(5/2) (1 + g)^(-1/2) Sigma / (1 + f)^2
        Sigma = (p00 + p01 g + p02 g^2) + f (p10 + p11 g + p12 g^2)

    with psi the degeneracy parameter (electron chemical potential over kT,
    rest mass excluded) and lambda_C = h / (m_e c).  This is the EFF form with
    one power of f and two of g (their M = 1, N = 2).  We do not use their
    fitted coefficient table; the six coefficients are fixed here analytically
    by the limits the form must reproduce:

    * non-degenerate (f -> 0): Boltzmann electrons, n_e lambda_C^3 =
      8 pi theta K_2(1/theta) e^(1/theta) e^psi, to first order in
      theta = kT/m_e c^2 (p00, p01) and in the extreme-relativistic limit (p02);
    * completely degenerate (f -> infinity): Chandrasekhar's T = 0 pressure,
      to first order in g in the non-relativistic limit (p10, p11) and in the
      extreme-relativistic limit (p12).

    The electron density and energy follow from P_e(psi, T) by thermodynamic
    differentiation, as in EFF: n_e = (dP_e/dpsi)_T / kT and
    u_e rho = T (dP_e/dT)_psi - P_e, so the electron gas is consistent by
    construction.  Measured against Fermi-Dirac integrals done by quadrature
    (tests/physics/structure/test_eos.py) the error in n_e, P_e and u_e is
    below 0.4 % for kT < 0.01 m_e c^2 (T < 6e7 K) and below 0.9 % up to
    T = 1e9 K, at every degeneracy.

Ions and ionisation
    Nuclei are an ideal classical gas.  Hydrogen (H -> H+), helium (He -> He+
    -> He++) and three metal groups are in Saha equilibrium written with the
    electron chemical potential,

        n_(i+1) / n_i = (g_(i+1) w_(i+1)) / (g_i w_i) exp(-psi - chi_i / kT),

    which holds at any degeneracy (ground-state statistical weights g: H 2,
    H+ 1; He 1, He+ 2, He++ 1; w as below, 1 for a bare nucleus).  The
    free-electron density solves charge neutrality together with the EFF
    relation n_e(psi, T).  The fractions of an element are defined (and
    returned) also where its abundance is zero.

    Metals (Z) stand for the mix of Asplund, Grevesse, Sauval & Scott 2009
    (ARA&A 47, 481, Table 1, from memory): a number-mean atomic mass of 17.5 and
    Z/2 electrons per atomic mass unit when fully ionised (0.495 for that mix).
    They release electrons in three groups:

    * Na, Al, Ca: first ionisation, abundance-weighted mean 5.81 eV;
    * Mg, Si, Fe, Ni: first ionisation, abundance-weighted mean 7.88 eV;
    * all other metal electrons as one group bound by 100 eV (our rough
      average of the L-shell ionisation energies of C, N, O and Ne; the K
      shells are lumped in); this is a crude stand-in that makes metals fully
      ionised in the interior and neutral at the surface.

    The two donor groups keep n_e positive in cool atmospheres.  Partition
    function ratios of metals are set to 1.  Ionisation energies are NIST
    values (from memory).

Pressure ionisation
    Bound states carry the hard-sphere occupation probability of Hummer &
    Mihalas (1988, ApJ 331, 794), w = exp(-n_N V_b), with n_N the number
    density of all nuclei and V_b = (4 pi / 3)(2 <r>)^3 the volume excluded by
    a bound state of mean radius <r> = 3 a_0 / (2 Z_eff) (1s orbital).  Unlike
    Hummer & Mihalas every nucleus, ionised or not, counts as a perturber;
    then w depends on density and composition only, the free energy term is
    F_bound = kT sum_b N_b n_N V_b, it adds the positive pressure
    P_bound = kT sum_b n_b n_N V_b and nothing to u.  For hydrogen
    V = 113 a_0^3 puts w = 1/e at n_N = 6e22 cm^-3 (rho ~ 0.1 g/cm^3), within a
    factor 2 of the Mott density n^(1/3) a_0 ~ 0.26 (Mott 1961, from memory); at
    the solar centre w = e^-770 for H and e^-96 for He+, so both are fully
    ionised (pure Saha would leave ~30 % of the hydrogen neutral there).

Radiation
    P_rad = a T^4 / 3, u_rad = a T^4 / rho (black body, local thermodynamic
    equilibrium).

Neglected, and where it matters (see VALIDITY)
    * Coulomb (non-ideal) interactions: about -1 % in P at the solar centre
      (Debye-Hueckel estimate), more in cold dense matter.
    * Electron-positron pairs: above ~5e8 K at low density.
    * H2 molecules and H-: below ~5000 K.
    * The hard-sphere w grows only linearly with density in its exponent
      while the electron Fermi energy grows as rho^(2/3): in warm dense matter
      He+ survives where real matter is pressure-ionised (y_He2 ~ 0.5 at
      rho = 1, T = 5e5 K; 0.35 at rho = 10, T = 2e5 K), and in cold dense matter
      (T below ~5e4 K with rho above ~0.1 g/cm^3) H and He recombine.  Between
      0.5 and 0.9 R_sun the Sun keeps ~1 % neutral H and 1-3 % He+, as Saha
      with the Debye-Hueckel lowering would (~10 eV for He+ there).
    * Dense neutral gas: F_bound acts as a hard-sphere repulsion with twice
      the second virial coefficient of Hummer & Mihalas (every nucleus
      excludes every bound state), so neutral gas denser than ~1e-3 g/cm^3
      (T below ~1.4e4 K) is stiff: Gamma_1 = 1.68, 1.78 and 2.56 at 1e-3,
      1e-2 and 0.1 g/cm^3 (X = 0.7, T = 6000 K) instead of 5/3; real matter
      there is molecular and non-ideal otherwise.

Numerics
    Charge neutrality is one equation for x = ln f; ln n_e(x) has slope 3/4 to
    3/2, so x is well conditioned.  Three vectorised Newton steps with analytic
    Jacobian, from an explicit start (independent Saha estimates per species,
    mapped to x through the non-degenerate and degenerate limits of EFF),
    converge ~90 % of the points of a stellar model; up to four more steps on
    the rest converge everything except dense matter below ~2e5 K (rho above
    ~4 g/cm^3), where degeneracy makes the ionisation balance stiff; those
    points are finished by Newton steps kept inside a bracket of the root.
    Every point is accepted after a Newton step below 1e-9, leaving an error
    ~1e-18 in x, so the result is smooth to rounding whichever path a point
    took; no quantity is clipped where it matters.  The thermodynamic
    derivatives are analytic: partial derivatives at fixed x plus the
    implicit-function derivative of x.  4000 points take ~3 ms.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from radwalk.constants import A_RAD, E_CHARGE, EV, H_PLANCK, K_B, M_E, M_U, C
from radwalk.errors import ConfigError, ModelError
from radwalk.host.params import Validity

# --- electron gas -------------------------------------------------------------------------
_MC2 = M_E * C**2  # erg
_LAMBDA_C = H_PLANCK / (M_E * C)  # Compton wavelength, cm
_P_UNIT = _MC2 / _LAMBDA_C**3  # erg/cm^3
_E2 = np.e**2

# Coefficients of Sigma (module docstring); each is an exact limit, derived here.
# Non-degenerate: n_e lambda^3 -> (2 pi)^(3/2) (e^2 / 2) f theta^(3/2) (1 + 15 theta / 8), because
# e^psi -> e^2 f / 4 and n_e = 2 (2 pi m k T / h^2)^(3/2) e^psi (1 + 15 theta / 8 + ...);
# extreme-relativistic Boltzmann: n_e lambda^3 = 16 pi theta^3 e^psi.
_P00 = (2.0 * np.pi) ** 1.5 * _E2 / 2.0
_P01 = (15.0 / 8.0 + 0.5) * _P00
_P02 = 4.0 * np.pi * _E2
# Degenerate: with x_F = p_F / m_e c, x_F^2 = 4 g (1 + g) and Chandrasekhar's
# P lambda^3 / m c^2 = (8 pi / 15) x_F^5 (1 - 5 x_F^2 / 14 + ...) -> (2 pi / 3) x_F^4.
_P10 = 256.0 * np.pi / 15.0
_P11 = (15.0 / 14.0 + 0.5) * _P10
_P12 = 32.0 * np.pi / 3.0

# --- composition ----------------------------------------------------------------------------
_A_H = 1.00794  # standard atomic weight of H (IUPAC, from memory)
_A_HE = 4.002602  # standard atomic weight of He (IUPAC, from memory)
_A_Z = 17.5  # number-mean atomic mass of the Asplund et al. 2009 metal mix (our estimate from its Table 1)
_E_PER_U_Z = 0.5  # free electrons per m_u of metals when fully ionised (0.495 for that mix)
# Donor atoms per m_u of metals, Asplund et al. 2009 Table 1 (log eps Na 6.24, Al 6.45, Ca 6.34;
# Mg 7.60, Si 7.51, Fe 7.50, Ni 6.22; from memory) divided by the metal mass of that mix.
_NU_D1 = 3.71e-4
_NU_D2 = 5.79e-3
_NU_CORE = _E_PER_U_Z - _NU_D1 - _NU_D2

# Ionisation energies, eV (NIST Atomic Spectra Database, from memory).
_CHI_H = 13.598434
_CHI_HE1 = 24.587389
_CHI_HE2 = 54.417765
_CHI_D1 = 5.81  # abundance-weighted mean of Na 5.139, Al 5.986, Ca 6.113
_CHI_D2 = 7.88  # abundance-weighted mean of Mg 7.646, Si 8.152, Fe 7.902, Ni 7.640
_CHI_CORE = 100.0  # representative binding of the other metal electrons (module docstring)

# Ground-state statistical weights: H 2, H+ 1; He 1, He+ 2, He++ 1; metal ratios set to 1.
_LN_G_H = np.log(2.0 / 1.0)  # ln(g_bound / g_ion)
_LN_G_HE1 = np.log(1.0 / 2.0)
_LN_G_HE2 = np.log(2.0 / 1.0)
_LN2 = np.log(2.0)
_CHI_HE1_ERG = _CHI_HE1 * EV
_CHI_HE2_ERG = _CHI_HE2 * EV

# Excluded volumes (4 pi / 3) (2 <r>)^3 with <r> = 1.5 a_0 / Z_eff (1s).
_A0 = H_PLANCK**2 / (4.0 * np.pi**2 * M_E * E_CHARGE**2)  # Bohr radius, cm


def _excluded_volume(z_eff):
    return 4.0 * np.pi / 3.0 * (2.0 * 1.5 * _A0 / z_eff) ** 3


_V_H = _excluded_volume(1.0)
_V_HE0 = _excluded_volume(27.0 / 16.0)  # variational Z_eff of the He ground state
_V_HE1 = _excluded_volume(2.0)
_V_DONOR = _V_H  # outer electrons of the donors are at least as large; taken as H
_V_CORE = 4.0 * np.pi / 3.0 * _A0**3  # <r> = 0.5 a_0, our choice for the inner metal electrons

# The four two-stage species stacked along axis 0: H, donor groups 1 and 2, metal core.
_CHI_2 = np.array([_CHI_H, _CHI_D1, _CHI_D2, _CHI_CORE]) * EV
_LN_G_2 = np.array([_LN_G_H, 0.0, 0.0, 0.0])[:, None]
_V_2 = np.array([_V_H, _V_DONOR, _V_DONOR, _V_CORE])
# Constant rows turning the stacked weights of _state into sums over species.  Columns: the
# four two-stage species (bound - ion: dq = -1, dE = -chi, dphi / n_N = V), then the He
# pairs 01, 02, 12 (dq = -1, -2, -1; dE = -chi1, -(chi1 + chi2), -chi2;
# dphi / n_N = V0 - V1, V0, V1).
_DQ = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 1.0])
_DE = np.concatenate([_CHI_2, [_CHI_HE1_ERG, _CHI_HE1_ERG + _CHI_HE2_ERG, _CHI_HE2_ERG]])
_DV = np.concatenate([_V_2, [_V_HE0 - _V_HE1, _V_HE0, _V_HE1]])
_MOMENTS = np.stack([_DQ * _DQ, _DQ * _DE, _DE * _DE, _DQ * _DV, _DE * _DV, _DV * _DV])
# rows for the means: charge and energy of each stage (two-stage ionised; He0, He+, He++)
_MEANS = np.array([[1.0, 1.0, 1.0, 1.0, 0.0, 1.0, 2.0],
                   np.concatenate([_CHI_2, [0.0, _CHI_HE1_ERG, _CHI_HE1_ERG + _CHI_HE2_ERG]])])

_N_NEWTON = 3  # Newton steps on every point
_N_MORE = 4  # further steps on the points not yet converged
_DONE = 1e-9  # a last step this small leaves an error ~1e-18 in x = ln f
_MAX_FINISH = 200
_STEP_CAP = 8.0
_EXP_CAP = 700.0  # exp(700) ~ 1e304: beyond it the capped fraction is below 1e-304 anyway

VALIDITY = Validity(
    T=(5.0e3, 5.0e8),
    rho=(1.0e-12, 1.0e6),
    X=(0.0, 1.0),
    Z=(0.0, 0.1),
    note=(
        "ideal ions, EFF-form electrons (<0.4 % below 6e7 K, <0.9 % to 1e9 K), radiation, Saha "
        "ionisation of H, He and three metal groups with hard-sphere pressure ionisation; "
        "evaluates without NaN for 3e3-1e9 K, 1e-12-1e6 g/cm^3 and any X, Z with X + Z <= 1, "
        "but misses H2/H- below ~5e3 K, e+e- pairs above ~5e8 K and Coulomb corrections (~1 % in "
        "P at the solar centre); pressure ionisation is too weak in warm dense matter (He+ "
        "survives at rho ~ 0.1-10 g/cm^3 below ~5e5 K) and H, He recombine unphysically in cold "
        "dense matter (T < ~5e4 K with rho > ~0.1 g/cm^3); dense neutral gas (rho > ~1e-3 g/cm^3 "
        "below ~1.4e4 K) is too stiff (Gamma_1 2.6 at 0.1 g/cm^3); metals are a crude three-group model, "
        "so Z > 0.1 is outside"
    ),
)


class EosState(NamedTuple):
    """Thermodynamic state; every field has the broadcast shape of the inputs.

    Attributes
    ----------
    P, P_gas, P_rad : ndarray, dyn/cm^2
        Total, gas (electrons + ions + bound-state excluded volume) and
        radiation (a T^4 / 3) pressure.
    u : ndarray, erg/g
        Specific internal energy: thermal + radiation + ionisation energy
        (zero for neutral atoms at rest; electron rest mass excluded).
    mu : ndarray, dimensionless
        Mean molecular weight per free particle (nuclei + free electrons).
    n_e : ndarray, cm^-3
        Free-electron density (of the electron gas; equals the charge of the
        ions to rounding).
    y_H, y_He1, y_He2 : ndarray, dimensionless
        Fraction of H ionised; of He singly and doubly ionised (defined
        also where X or Y is zero).
    chi_rho, chi_T : ndarray, dimensionless
        (dln P / dln rho)_T and (dln P / dln T)_rho.
    delta : ndarray, dimensionless
        -(dln rho / dln T)_P = chi_T / chi_rho.
    c_P, c_V : ndarray, erg g^-1 K^-1
        Specific heats at constant pressure and volume.
    nabla_ad : ndarray, dimensionless
        (dln T / dln P) at constant entropy.
    Gamma_1 : ndarray, dimensionless
        (dln P / dln rho) at constant entropy.
    eta : ndarray, dimensionless
        Electron degeneracy parameter: chemical potential over kT, without rest mass.
    """

    P: np.ndarray
    P_gas: np.ndarray
    P_rad: np.ndarray
    u: np.ndarray
    mu: np.ndarray
    n_e: np.ndarray
    y_H: np.ndarray
    y_He1: np.ndarray
    y_He2: np.ndarray
    chi_rho: np.ndarray
    chi_T: np.ndarray
    delta: np.ndarray
    c_P: np.ndarray
    c_V: np.ndarray
    nabla_ad: np.ndarray
    Gamma_1: np.ndarray
    eta: np.ndarray


# --- electron gas in EFF variables --------------------------------------------------------


def _psi_of_x(x):
    """Degeneracy parameter psi and dpsi/dx = sqrt(1 + f) for x = ln f."""
    f = np.exp(x)
    s = np.sqrt(1.0 + f)
    # ln((s - 1)/(s + 1)) = ln f - 2 ln(1 + s), free of cancellation at small f
    return 2.0 * s + x - 2.0 * np.log1p(s), s


def _electron_gas(x, theta, ln_theta, derivatives=False):
    """EFF electron gas at x = ln f and theta = kT / m_e c^2.

    Returns a dict of arrays: psi, s = dpsi/dx, lnN (n_e = e^lnN / lambda_C^3),
    dlnN_dx, and with ``derivatives`` also lnF (P_e = _P_UNIT e^lnF),
    a_g = (dln P_e/dln T)_psi, B = (dln P_e/dx)_T, da_g_dx, da_g_dlt, dlnN_dlt.
    """
    f = np.exp(x)
    opf = 1.0 + f
    inv_opf = 1.0 / opf
    l1f = np.log1p(f)
    s = np.sqrt(opf)
    psi = 2.0 * s + x - 2.0 * np.log1p(s)
    g = theta * s
    l1g = np.log1p(g)
    g_opg = g / (1.0 + g)
    p0 = _P00 + g * (_P01 + _P02 * g)
    q = _P10 + g * (_P11 + _P12 * g)
    p0g = _P01 + 2.0 * _P02 * g  # dp0/dg
    sig = p0 + f * q
    inv_sig = 1.0 / sig
    c = g * (p0g + f * (_P11 + 2.0 * _P12 * g)) * inv_sig  # g dln(Sigma)/dg at fixed f
    r0 = p0 * inv_sig
    a_g = 2.5 - 0.5 * g_opg + c
    h = 0.5 * f * inv_opf  # dln g / dx
    B = 2.0 * inv_opf - r0 + a_g * h
    # ln N = ln F - ln g + ln B with ln g = ln theta + l1f / 2
    lnN = x + 1.5 * ln_theta - 1.25 * l1f - 0.5 * l1g + np.log(sig * B)

    # x-derivatives at fixed theta (f q / Sigma = 1 - r0, g f q_g / Sigma = c - k)
    k = g * p0g * inv_sig
    hc = h * c
    dlnsig_dx = hc + 1.0 - r0
    g2sgg = g * g * (2.0 * (_P02 + f * _P12)) * inv_sig  # g^2 d2(Sigma)/dg^2 / Sigma
    h_opf = h * inv_opf
    g_opg2 = g_opg * (1.0 - g_opg)  # g / (1 + g)^2
    da_f_dx = r0 * dlnsig_dx - 4.0 * h_opf - h * k
    da_g_dx = hc + h * g2sgg + c - k - c * dlnsig_dx - 0.5 * h * g_opg2
    dlnN_dx = B - h + (da_f_dx + h * da_g_dx + a_g * h_opf) / B
    out = {"psi": psi, "s": s, "lnN": lnN, "dlnN_dx": dlnN_dx}
    if derivatives:
        # ln T derivatives at fixed x (g scales with T)
        da_g_dlt = c + g2sgg - c * c - 0.5 * g_opg2
        dB_dlt = r0 * c - k + h * da_g_dlt
        lnF = x + 2.5 * ln_theta - 0.75 * l1f - 0.5 * l1g + np.log(sig)
        out.update(lnF=lnF, a_g=a_g, B=B, da_g_dx=da_g_dx, da_g_dlt=da_g_dlt, dlnN_dlt=a_g - 1.0 + dB_dlt / B)
    return out


def electron_gas(eta, T):
    """Electron density, pressure and energy density of the EFF-form electron gas.

    Parameters
    ----------
    eta : array_like, dimensionless
        Degeneracy parameter (chemical potential over kT, rest mass excluded).
    T : array_like, K
        Temperature.

    Returns
    -------
    n_e : ndarray, cm^-3
    P_e : ndarray, dyn/cm^2
    e_e : ndarray, erg/cm^3
        Kinetic energy density.

    Notes
    -----
    The form of Eggleton, Faulkner & Flannery (1973) with coefficients fixed
    by the exact limits (module docstring).  eta is inverted to x = ln f by
    Newton steps; useful for tests and diagnostics, not for the solver.
    """
    eta, T = np.broadcast_arrays(np.asarray(eta, dtype=float), np.asarray(T, dtype=float))
    theta = K_B * T / _MC2
    # start: psi ~ ln(f/4) + 2 (non-degenerate), psi ~ 2 sqrt(f) (degenerate)
    sp = np.logaddexp(0.0, eta - 2.0)  # e^(eta - 2) when non-degenerate, eta - 2 when degenerate
    x = np.log(4.0 * sp + 0.25 * sp**2)
    for _ in range(60):
        psi, s = _psi_of_x(x)
        x = x - (psi - eta) / s
    st = _electron_gas(x, theta, np.log(theta), derivatives=True)
    P_e = _P_UNIT * np.exp(st["lnF"])
    return np.exp(st["lnN"]) / _LAMBDA_C**3, P_e, P_e * (st["a_g"] - 1.0)


# --- charge balance --------------------------------------------------------------------------


class _Balance(NamedTuple):
    """Per-point constants of the charge balance (arrays [n], or [4, n] for the stacked species)."""

    theta: np.ndarray  # kT / m_e c^2
    ln_theta: np.ndarray
    ln_rl3: np.ndarray  # ln(rho lambda_C^3 / m_u)
    Lc2: np.ndarray  # [4, n] ln(n_bound / n_ion) - psi of H, donor groups, metal core
    c2: np.ndarray  # [4, n] sites per m_u
    Lc_he1: np.ndarray  # ln(n_He0 / n_He+) - psi
    Lc_he2: np.ndarray  # ln(n_He+ / n_He++) - psi
    c_he: np.ndarray

    def take(self, idx):
        return _Balance(*(a[..., idx] for a in self))


def _helium_weights(L1, L2):
    """Unnormalised He0, He+, He++ weights exp(L1 + L2 - m), exp(L2 - m), exp(-m) and m.

    The shift m keeps every exponent <= 0; the fractions do not depend on it.
    """
    e0 = L1 + L2
    m = np.maximum(np.maximum(e0, L2), 0.0)
    return np.exp(e0 - m), np.exp(L2 - m), np.exp(-m), m


def _residual(x, b):
    """R = ln n_e(electron gas) - ln n_e(ion charges) at x = ln f, and dR/dx."""
    el = _electron_gas(x, b.theta, b.ln_theta)
    psi, s = el["psi"], el["s"]
    t = np.exp(np.minimum(b.Lc2 + psi, _EXP_CAP))  # n_bound / n_ion
    opt = 1.0 + t
    cy = b.c2 / opt  # c y_ion
    t0, t1, t2, _ = _helium_weights(b.Lc_he1 + psi, b.Lc_he2 + psi)
    inv = 1.0 / (t0 + t1 + t2)
    y0, y1, y2 = t0 * inv, t1 * inv, t2 * inv
    # electrons per m_u and its psi-derivative (minus the charge variance of each species);
    # the floor keeps ln finite for a wild iterate and is negligible at any solution
    E = cy.sum(axis=0) + b.c_he * (y1 + 2.0 * y2) + 1e-300
    dE = -np.einsum("ij,ij->j", cy, t / opt) - b.c_he * (y0 * (y1 + 4.0 * y2) + y1 * y2)
    return el["lnN"] - b.ln_rl3 - np.log(E), el["dlnN_dx"] - s * dE / E


def _residual_logspace(x, b):
    """As :func:`_residual`, with the ion side as a log-sum-exp over the species.

    Slower, but R and its slope stay informative when every ionised fraction
    underflows (far-off iterates in cold dense matter).
    """
    el = _electron_gas(x, b.theta, b.ln_theta)
    psi, s = el["psi"], el["s"]
    L = b.Lc2 + psi
    sp = np.maximum(L, 0.0) + np.log1p(np.exp(-np.abs(L)))  # ln(1 + e^L) = -ln y_ion
    with np.errstate(divide="ignore"):  # an absent species has ln c = -inf and weight 0
        terms = np.log(b.c2) - sp
        L2 = b.Lc_he2 + psi
        t0, t1, t2, m = _helium_weights(b.Lc_he1 + psi, L2)
        D = t0 + t1 + t2
        num = np.logaddexp(L2, _LN2)  # ln(e^L2 + 2): He+ once, He++ twice (unnormalised)
        term_he = np.log(b.c_he) + num - m - np.log(D)
    top = np.maximum(terms.max(axis=0), term_he)
    wts = np.exp(terms - top)
    w_he = np.exp(term_he - top)
    tot = wts.sum(axis=0) + w_he
    # dln(y1 + 2 y2)/dpsi for helium, -y_bound for the two-stage species
    dln_he = np.exp(L2 - num) - (2.0 * t0 + t1) / D
    dlnE = (w_he * dln_he - np.einsum("ij,ij->j", wts, np.exp(L - sp))) / tot
    return el["lnN"] - b.ln_rl3 - top - np.log(tot), el["dlnN_dx"] - s * dlnE


def _newton_step(R, R_x):
    dx = -R / R_x
    # smooth step limit (identity to O(dx^3) near the root) against wild first steps
    return dx / np.sqrt(1.0 + (dx / _STEP_CAP) ** 2)


def _solve(x, b):
    """x = ln f at charge balance.

    _N_NEWTON Newton steps on every point, then up to _N_MORE on the points
    whose last step was not yet below _DONE; a point with such a step is
    converged to rounding (Newton's error squares).  What is left (cold dense
    matter) goes to :func:`_finish`.  The result does not depend on which path
    a point took beyond rounding.
    """
    for _ in range(_N_NEWTON):
        dx = _newton_step(*_residual(x, b))
        x = x + dx
    todo = np.nonzero(~(np.abs(dx) <= _DONE))[0]
    for _ in range(_N_MORE):
        if not todo.size:
            return x
        bt = b.take(todo)
        dx = _newton_step(*_residual(x[todo], bt))
        x[todo] += dx
        todo = todo[~(np.abs(dx) <= _DONE)]
    if todo.size:
        x[todo] = _finish(x[todo], b.take(todo))
    return x


def _finish(x, b):
    """Newton steps kept inside a shrinking bracket of the root, on the points not yet converged.

    R grows monotonically with x, so each evaluation narrows the bracket; a
    step leaving it is replaced by bisection.  A point is done when its Newton
    step is below _DONE.
    """
    out = x.copy()
    idx = np.arange(x.size)
    lo = np.full_like(x, -np.inf)
    hi = np.full_like(x, np.inf)
    for _ in range(_MAX_FINISH):
        R, R_x = _residual_logspace(x, b)
        below = R < 0.0
        lo = np.where(below, np.maximum(lo, x), lo)
        hi = np.where(below, hi, np.minimum(hi, x))
        dx = _newton_step(R, R_x)
        done = np.abs(dx) <= _DONE
        out[idx[done]] = x[done] + dx[done]
        xn = x + dx
        bisect = ~((xn > lo) & (xn < hi)) & np.isfinite(lo) & np.isfinite(hi)
        xn = np.where(bisect, 0.5 * (lo + hi), xn)
        keep = ~done
        if not keep.any():
            return out
        idx, x, lo, hi, b = idx[keep], xn[keep], lo[keep], hi[keep], b.take(keep)
    raise ModelError(
        f"EOS charge balance did not converge at {idx.size} points after {_MAX_FINISH} bracketed Newton steps"
    )


def _initial_x(rho, theta, c2, c_he, Lc2, Lc_he1, Lc_he2):
    """Explicit start for x = ln f.

    Each species alone in non-degenerate Saha equilibrium has y^2 / (1 - y) = K / n with
    K = n_Q exp(-L_c), so y = 2 / (1 + sqrt(1 + 4 n exp(L_c) / n_Q)).  The sum of these
    electrons is mapped to f through the non-degenerate (f ~ n lambda^3 / p00 theta^3/2)
    and degenerate (g from the Fermi momentum) limits of the EFF relation.
    """
    n_q = 2.0 * (2.0 * np.pi * theta) ** 1.5 / _LAMBDA_C**3
    k = 4.0 * rho / (M_U * n_q)
    y2 = 2.0 / (1.0 + np.sqrt(1.0 + k * c2 * np.exp(np.minimum(Lc2, _EXP_CAP))))
    ya = 2.0 / (1.0 + np.sqrt(1.0 + k * c_he * np.exp(np.minimum(Lc_he1, _EXP_CAP))))
    yb = 2.0 / (1.0 + np.sqrt(1.0 + k * c_he * np.exp(np.minimum(Lc_he2, _EXP_CAP))))
    n_lambda3 = rho * (_LAMBDA_C**3 / M_U) * (np.einsum("ij,ij->j", c2, y2) + c_he * ya * (1.0 + yb)) + 1e-300
    f_nd = n_lambda3 / (theta**1.5 / np.sqrt(1.0 + theta) * (_P00 + theta * (_P01 + _P02 * theta)))
    w = (3.0 * n_lambda3 / (64.0 * np.pi)) ** (2.0 / 3.0)  # g (1 + g) when degenerate
    g = 2.0 * w / (1.0 + np.sqrt(1.0 + 4.0 * w))
    return np.log(f_nd + (g / theta) ** 2)


# --- public entry point ----------------------------------------------------------------------


def _check_inputs(rho, T, X, Z):
    # min/max propagate NaN, which then fails every comparison
    if not (rho.min() > 0.0 and T.min() > 0.0 and np.isfinite(rho.max()) and np.isfinite(T.max())):
        raise ConfigError("eos_state needs finite rho > 0 and T > 0")
    if not (X.min() >= 0.0 and Z.min() >= 0.0 and (X + Z).max() <= 1.0 + 1e-12):
        raise ConfigError("eos_state needs mass fractions 0 <= X, 0 <= Z, X + Z <= 1 (finite)")


def eos_state(rho, T, X, Z) -> EosState:
    """Thermodynamic state of stellar matter from density, temperature and composition.

    Parameters
    ----------
    rho : array_like, g/cm^3
        Density.
    T : array_like, K
        Temperature.
    X : array_like, dimensionless
        Hydrogen mass fraction.
    Z : array_like, dimensionless
        Metal mass fraction; helium is Y = 1 - X - Z.

    Returns
    -------
    EosState
        Named tuple of arrays of the broadcast shape of the inputs; see
        :class:`EosState` for the fields and units.

    Raises
    ------
    ConfigError
        If rho or T is not positive and finite, or X, Z are not mass fractions.
    ModelError
        If the charge balance does not converge (not seen anywhere in
        3e3-1e9 K, 1e-12-1e6 g/cm^3).

    Notes
    -----
    Physics and sources are in the module docstring; trust ranges in
    :data:`VALIDITY`.  The response functions follow Kippenhahn, Weigert &
    Weiss (2012, ch. 4 and 14): c_P = c_V + P chi_T^2 / (rho T chi_rho),
    nabla_ad = P chi_T / (rho T c_P chi_rho), Gamma_1 = chi_rho / (1 - chi_T nabla_ad).
    """
    rho, T, X, Z = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (rho, T, X, Z)))
    shape = rho.shape
    rho, T, X, Z = (a.ravel() for a in (rho, T, X, Z))
    if rho.size:
        _check_inputs(rho, T, X, Z)

    kT = K_B * T
    beta = 1.0 / kT
    theta = kT / _MC2
    c2 = np.stack([X / _A_H, _NU_D1 * Z, _NU_D2 * Z, _NU_CORE * Z])  # sites per m_u
    c_he = (1.0 - X - Z) / _A_HE
    nu_N = X / _A_H + c_he + Z / _A_Z  # nuclei per m_u
    n_N = rho * nu_N / M_U

    # hard-sphere exponents phi = n_N V (proportional to rho) and the psi-free parts of
    # L = ln(n_bound / n_ion) = ln(g_b / g_i) + psi + chi / kT - phi_b + phi_i
    phi_he0 = n_N * _V_HE0
    phi_he1 = n_N * _V_HE1
    Lc2 = _LN_G_2 + np.outer(_CHI_2, beta) - np.outer(_V_2, n_N)
    Lc_he1 = _LN_G_HE1 + beta * _CHI_HE1_ERG - phi_he0 + phi_he1
    Lc_he2 = _LN_G_HE2 + beta * _CHI_HE2_ERG - phi_he1

    b = _Balance(theta, np.log(theta), np.log(rho * (_LAMBDA_C**3 / M_U)), Lc2, c2, Lc_he1, Lc_he2, c_he)
    x = _solve(_initial_x(rho, theta, c2, c_he, Lc2, Lc_he1 - phi_he1, Lc_he2), b)
    return _state(rho, T, x, b, beta, c2, c_he, nu_N, n_N, shape)


def _state(rho, T, x, b, beta, c2, c_he, nu_N, n_N, shape):
    """Pressure, energy and their analytic derivatives at the solved x.

    Ionisation sums are moments over the stages of each species: with exponents
    e_k = ln(g_k w_k) - q_k psi - E_k / kT (charge q, energy E above the neutral
    atom, phi = -ln w = n_N V), d<a>/dv = <da/dv> + Cov(a, de/dv) for v = x, ln T,
    ln rho, and Cov(a, b) = sum_(i<j) y_i y_j (a_i - a_j)(b_i - b_j) has no
    cancellation.  The pair weights c y_i y_j of all species are stacked into
    one [7, n] array; the constant rows of _MOMENTS turn it into every sum.
    """
    n = x.size
    kT = K_B * T
    el = _electron_gas(x, b.theta, b.ln_theta, derivatives=True)
    psi, s = el["psi"], el["s"]

    t = np.exp(np.minimum(b.Lc2 + psi, _EXP_CAP))  # two-stage species, n_bound / n_ion
    y_ion = 1.0 / (1.0 + t)
    t0, t1, t2, _ = _helium_weights(b.Lc_he1 + psi, b.Lc_he2 + psi)
    inv = 1.0 / (t0 + t1 + t2)
    y0, y1, y2 = t0 * inv, t1 * inv, t2 * inv
    ci = np.empty((7, n))  # c y_ion for the two-stage species; c_he y_k for He0, He+, He++
    ci[:4] = c2 * y_ion
    ci[4], ci[5], ci[6] = c_he * y0, c_he * y1, c_he * y2
    cyb = ci[:4] * t  # c y_bound, accurate also when y_bound is tiny
    w = np.empty((7, n))  # pair weights c y_i y_j: two-stage (ion, bound); He 01, 02, 12
    w[:4] = cyb * y_ion
    w[4], w[5], w[6] = ci[4] * y1, ci[4] * y2, ci[5] * y2
    m = _MOMENTS @ w  # Var q, Cov(q,E), Var E, -Cov(q,phi)/n_N, -Cov(E,phi)/n_N, Var phi/n_N^2
    E, U = _MEANS @ ci  # electrons and ionisation energy per m_u
    Phi = n_N * (_V_2 @ cyb + _V_HE0 * ci[4] + _V_HE1 * ci[5])  # sum c <phi> per m_u

    # x derivatives from R = lnN - ln(rho lambda^3 / m_u) - ln E = 0
    E = np.maximum(E, 1e-300)  # the floor only guards a failed state
    R_x = el["dlnN_dx"] + s * m[0] / E
    x_r = (1.0 + n_N * m[3] / E) / R_x
    x_t = -(el["dlnN_dlt"] - beta * m[1] / E) / R_x

    # pressure: electrons + nuclei + bound-state excluded volume + radiation
    P_e = _P_UNIT * np.exp(el["lnF"])
    B, a_g = el["B"], el["a_g"]
    P_ion = n_N * kT
    T2 = T * T
    P_rad = (A_RAD / 3.0) * T2 * T2
    k_sites = kT * rho / M_U
    P_b = k_sites * Phi
    Pex_Pbx = P_e * B + k_sites * s * n_N * m[3]
    P_gas = P_e + P_ion + P_b
    P = P_gas + P_rad
    dP_dr = Pex_Pbx * x_r + P_ion + 2.0 * P_b - k_sites * n_N**2 * m[5]
    dP_dt = Pex_Pbx * x_t + P_e * a_g + P_ion + 4.0 * P_rad + P_b - k_sites * beta * n_N * m[4]

    # specific internal energy: electrons + nuclei + radiation + ionisation
    ee_x = P_e * (B * (a_g - 1.0) + el["da_g_dx"])
    ee_t = P_e * (a_g * (a_g - 1.0) + el["da_g_dlt"])
    u_th = 1.5 * nu_N * kT / M_U
    u_rad = 3.0 * P_rad / rho
    u = P_e * (a_g - 1.0) / rho + u_th + u_rad + U / M_U
    c_V = ((ee_t + ee_x * x_t) / rho + u_th + 4.0 * u_rad + (beta * m[2] - s * m[1] * x_t) / M_U) / T

    chi_rho = dP_dr / P
    chi_T = dP_dt / P
    # Gamma_1 = chi_rho / (1 - chi_T nabla_ad) and nabla_ad written without the cancellation
    # in 1 - chi_T nabla_ad = c_V / c_P, which loses every digit when radiation dominates
    pt = P * chi_T / (rho * T)
    Gamma_1 = chi_rho + pt * chi_T / c_V
    fields = dict(P=P, P_gas=P_gas, P_rad=P_rad, u=u, mu=1.0 / (nu_N + E),
                  n_e=np.exp(el["lnN"]) / _LAMBDA_C**3, y_H=y_ion[0], y_He1=y1, y_He2=y2,
                  chi_rho=chi_rho, chi_T=chi_T, delta=chi_T / chi_rho, c_P=c_V + pt * chi_T / chi_rho,
                  c_V=c_V, nabla_ad=pt / (c_V * Gamma_1), Gamma_1=Gamma_1, eta=psi)
    return EosState(**{k: v.reshape(shape) for k, v in fields.items()})
