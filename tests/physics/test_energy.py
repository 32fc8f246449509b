"""Tests of the pp + CNO energy generation (pipeline/energy.py)."""

import warnings

import numpy as np
import pytest
from scipy.optimize import brentq

from radwalk.host.params import Validity
from radwalk.physics import energy

# Standard solar model BS05(OP) central zone: Bahcall, Serenelli & Basu 2005, ApJ 621, L85.
BS05_TC = 1.567e7  # K
BS05_RHOC = 152.9  # g/cm^3
BS05_XC = 0.346
BS05_ZC = 0.02  # approximate central metallicity


def _log_slope(f, T, h=1e-4):
    return (np.log(f(T * np.exp(h))) - np.log(f(T * np.exp(-h)))) / (2 * h)


def test_si_to_cgs_conversion_of_the_fits():
    # Carroll & Ostlie 1996, eqs. 10.46 and 10.58, in SI (rho in kg/m^3, W/kg), evaluated
    # here independently; 1 W/kg = 1e4 erg g^-1 s^-1.
    rho, T, X, Z = 80.0, 1.3e7, 0.6, 0.015
    t6 = T / 1e6
    rho_si = rho * 1e3
    c_pp = 1 + 0.0123 * t6 ** (1 / 3) + 0.0109 * t6 ** (2 / 3) + 0.0009 * t6
    c_cno = 1 + 0.0027 * t6 ** (1 / 3) - 0.00778 * t6 ** (2 / 3) - 0.000149 * t6
    f_pp = energy.screening_pp(rho, T, X, Z)
    pp_si = 0.241 * rho_si * X**2 * f_pp * 1.0 * c_pp * t6 ** (-2 / 3) * np.exp(-33.80 * t6 ** (-1 / 3))
    cno_si = 8.67e20 * rho_si * X * (0.7 * Z) * c_cno * t6 ** (-2 / 3) * np.exp(-152.28 * t6 ** (-1 / 3))
    assert energy.eps_pp(rho, T, X, Z) == pytest.approx(pp_si * 1e4, rel=1e-12)
    assert energy.eps_cno(rho, T, X, Z) == pytest.approx(cno_si * 1e4, rel=1e-12)
    assert energy.eps_nuclear(rho, T, X, Z) == pytest.approx((pp_si + cno_si) * 1e4, rel=1e-12)


def test_weak_screening_at_the_solar_centre():
    # Weak (Salpeter 1954) screening raises the solar p + p rate by about 5 % (from memory);
    # for X = 0.7, Z = 0.02 the factor is 1 + 0.25 rho^0.5 T6^-1.5 to first order
    # (Kippenhahn, Weigert & Weiss 2012, sect. 18.4).
    f = energy.screening_pp(BS05_RHOC, BS05_TC, BS05_XC, BS05_ZC)
    assert 1.03 < f < 1.07
    rho, T = 50.0, 1.2e7
    # 0.25 is rounded; 0.188 zeta is 0.254 without the metals' charges and 0.26 with them.
    assert energy.screening_pp(rho, T, 0.7, 0.02) - 1 == pytest.approx(
        0.25 * rho**0.5 * (T / 1e6) ** -1.5, rel=0.06)


def test_eps_pp_at_the_bs05_centre():
    # REFERENCES.md: ~17 erg/g/s with the Carroll & Ostlie form at the BS05 centre (computed).
    # A factor 2 allows for psi_pp (1 here, the ppI limit; ~1.5 would give 17) and the
    # screening choice.
    e = energy.eps_pp(BS05_RHOC, BS05_TC, BS05_XC, BS05_ZC)
    assert 17 / 2 < e < 17 * 2
    # psi_pp enters linearly
    assert energy.eps_pp(BS05_RHOC, BS05_TC, BS05_XC, BS05_ZC, psi_pp=1.5) == pytest.approx(1.5 * e)


def test_temperature_exponents_near_solar_centre():
    # REFERENCES.md / Carroll & Ostlie 1996 ch. 10: eps_pp ~ T^4 and eps_CNO ~ T^(18-20)
    # near 1.5e7 K.
    nu = energy.temperature_exponents(100.0, 1.5e7, 0.7, 0.02)
    assert 3.5 < nu.pp < 4.5
    assert 18.0 < nu.cno < 20.5
    assert nu.pp < nu.total < nu.cno


@pytest.mark.parametrize("T", [5e6, 1.5e7, 3e7])
def test_analytic_exponents_match_finite_differences(T):
    rho, X, Z = 60.0, 0.5, 0.02
    nu = energy.temperature_exponents(rho, T, X, Z)
    assert nu.pp == pytest.approx(_log_slope(lambda t: energy.eps_pp(rho, t, X, Z), T), abs=1e-5)
    assert nu.cno == pytest.approx(_log_slope(lambda t: energy.eps_cno(rho, t, X, Z), T), abs=1e-5)
    assert nu.total == pytest.approx(_log_slope(lambda t: energy.eps_nuclear(rho, t, X, Z), T), abs=1e-5)


def _crossover(rho, X, Z):
    def log_ratio(lt):
        return np.log(energy.eps_pp(rho, 10**lt, X, Z) / energy.eps_cno(rho, 10**lt, X, Z))

    return 10 ** brentq(log_ratio, 6.5, 8.0)


@pytest.mark.parametrize("rho", [1.0, 100.0])
def test_cno_overtakes_pp_near_1p8e7_K(rho):
    # CNO overtakes pp between ~1.6e7 and 2.0e7 K at solar composition (common practice, no
    # source; Carroll & Ostlie 1996 Fig. 10.9 shows the crossing near 1.8e7 K, from memory).
    T_x = _crossover(rho, 0.7, 0.02)
    assert 1.6e7 < T_x < 2.0e7
    assert energy.eps_cno(rho, 0.9 * T_x, 0.7, 0.02) < energy.eps_pp(rho, 0.9 * T_x, 0.7, 0.02)
    assert energy.eps_cno(rho, 1.1 * T_x, 0.7, 0.02) > energy.eps_pp(rho, 1.1 * T_x, 0.7, 0.02)


def test_less_metal_pushes_the_crossover_hotter():
    assert _crossover(100.0, 0.7, 0.002) > _crossover(100.0, 0.7, 0.02)


def test_cold_gas_gives_zero_without_warnings():
    T = np.array([0.0, 10.0, 1e3, 1e4])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with np.errstate(all="raise"):
            pp = energy.eps_pp(1.0, T, 0.7, 0.02)
            cno = energy.eps_cno(1.0, T, 0.7, 0.02)
            tot = energy.eps_nuclear(np.array([0.0, 1.0, 1e3, 1e5]), T, 0.7, 0.02)
    assert np.all(np.isfinite(pp)) and np.all(np.isfinite(cno)) and np.all(np.isfinite(tot))
    # exp(-x) underflows to 0 for x > 745: CNO below ~8.5e3 K, pp below ~90 K.
    assert np.all(cno[:3] == 0.0) and cno[3] < 1e-250
    assert pp[0] == 0.0 and pp[1] == 0.0
    assert pp[2] < 1e-120 and pp[3] < 1e-30  # 1e3 K: exp(-338), negligible but not underflowed
    assert np.all(tot >= 0)


def test_rates_vanish_without_fuel_and_scale_with_density():
    assert energy.eps_pp(100.0, 1.5e7, 0.0, 0.02) == 0.0
    assert energy.eps_cno(100.0, 1.5e7, 0.7, 0.0) == 0.0
    # pp: rho X^2 times the weak screening factor; CNO: rho X Z exactly.
    ref = energy.eps_cno(100.0, 1.5e7, 0.7, 0.02)
    assert energy.eps_cno(200.0, 1.5e7, 0.7, 0.02) == pytest.approx(2 * ref)
    assert energy.eps_cno(100.0, 1.5e7, 0.35, 0.02) == pytest.approx(0.5 * ref)
    ratio = energy.eps_pp(100.0, 1.5e7, 0.7, 0.02) / energy.eps_pp(100.0, 1.5e7, 0.35, 0.02)
    assert 4.0 < ratio < 4.05  # X^2 = 4, plus a little screening (zeta^2 = 2X + 1.5Y + 5Z grows with X)


def test_broadcasting_matches_a_loop():
    rng = np.random.default_rng(7)
    n, g = 4, 6
    rho = 10 ** rng.uniform(-1, 2.5, (n, g))
    T = 10 ** rng.uniform(6.5, 7.5, (n, g))
    X = rng.uniform(0.3, 0.75, (n, 1))
    Z = rng.uniform(0.002, 0.03, (n, 1))
    psi = rng.uniform(1, 2, (n, 1))
    full = energy.eps_nuclear(rho, T, X, Z, psi_pp=psi)
    nu = energy.temperature_exponents(rho, T, X, Z, psi_pp=psi)
    assert full.shape == (n, g) and nu.total.shape == (n, g) and nu.pp.shape == (n, g)
    for i in range(n):
        np.testing.assert_allclose(
            full[i], energy.eps_nuclear(rho[i], T[i], X[i, 0], Z[i, 0], psi_pp=psi[i, 0]), rtol=1e-13)
        np.testing.assert_allclose(
            nu.total[i], energy.temperature_exponents(rho[i], T[i], X[i, 0], Z[i, 0], psi_pp=psi[i, 0]).total,
            rtol=1e-12)


def test_validity_declared():
    assert isinstance(energy.VALIDITY, Validity)
    assert energy.VALIDITY.T == (4.0e6, 5.0e7)
    assert energy.VALIDITY.note
