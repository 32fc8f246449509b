"""Tests of the built-in opacity laws (plugins/opacity.py)."""

import numpy as np
import pytest

from plugins import opacity as op
from radwalk import constants
from radwalk.host.components import BoundOpacity, OpacityLaw
from radwalk.host.params import Param, Validity

# Standard solar model BS05(OP) central zone: Bahcall, Serenelli & Basu 2005, ApJ 621, L85.
BS05_TC = 1.567e7  # K
BS05_RHOC = 152.9  # g/cm^3
BS05_XC = 0.346
BS05_ZC = 0.02  # approximate central metallicity (BS05 give Z_c close to 0.02)

LAWS = op.radwalk_opacities()
BY_NAME = {law.name: law for law in LAWS}


def _slope(f, x, h=1e-4):
    """d ln f / d ln x by a central difference."""
    return (np.log(f(x * np.exp(h))) - np.log(f(x * np.exp(-h)))) / (2 * h)


# -- the hook and the component contract ---------------------------------------------

def test_hook_provides_four_components_with_declarations():
    assert [law.name for law in LAWS] == ["electron-scattering", "kramers", "h-minus", "combined"]
    for law in LAWS:
        assert isinstance(law, OpacityLaw)
        assert law.description and "\n" not in law.description
        assert isinstance(law.validity, Validity) and law.validity.T is not None
        assert law.validity.note
        for p in law.params:
            assert isinstance(p, Param)
            assert p.lower <= p.default <= p.upper
            assert p.description and not p.sampled


def test_components_do_not_share_param_objects():
    # The registry writes each Param's owner; kramers and combined must not share them.
    ids = [id(p) for law in op.radwalk_opacities() for p in law.params]
    assert len(ids) == len(set(ids))


def test_param_defaults_match_keyword_defaults():
    rho, T = 0.3, 2e5
    for law in LAWS:
        defaults = {p.name: p.default for p in law.params}
        assert law.kappa(rho, T, 0.7, 0.02, **defaults) == pytest.approx(law.kappa(rho, T, 0.7, 0.02))


# -- electron scattering ---------------------------------------------------------------

def test_thomson_cross_section_is_codata_2018():
    # CODATA 2018 recommended value of the Thomson cross-section, 6.6524587321e-29 m^2.
    assert constants.SIGMA_T == pytest.approx(6.6524587321e-25, rel=1e-10)


@pytest.mark.parametrize("X", [0.0, 0.346, 0.7, 1.0])
def test_electron_scattering_is_0p2_one_plus_x(X):
    # kappa_es = 0.2 (1 + X) cm^2/g (textbook: Carroll & Ostlie 1996; Kippenhahn, Weigert & Weiss 2012);
    # the exact sigma_T / (2 m_u) is 0.2004, so 0.3 %.
    k = BY_NAME["electron-scattering"].kappa(1.0, 1e7, X, 0.02)
    assert k == pytest.approx(0.2 * (1 + X), rel=3e-3)
    assert k == pytest.approx(constants.SIGMA_T * (1 + X) / (2 * constants.M_U), rel=1e-12)


def test_hot_correction_halves_scattering_at_the_klein_nishina_temperature():
    # Paczynski 1983 fit (from memory): at T = 4.5e8 K and low density the
    # Klein-Nishina term halves the Thomson value; at 1e6 K and 1e-6 g/cm^3 it is negligible.
    es = BY_NAME["electron-scattering"]
    k_kn = es.kappa(1e-8, 4.5e8, 0.7, 0.02, hot_correction=1)
    assert k_kn == pytest.approx(0.5 * op.thomson(0.7), rel=1e-3)
    assert es.kappa(1e-6, 1e6, 0.7, 0.02, hot_correction=1) == pytest.approx(op.thomson(0.7), rel=1e-2)
    # Degeneracy lowers it at the solar centre; the correction only ever lowers kappa.
    hot = es.kappa(BS05_RHOC, BS05_TC, BS05_XC, BS05_ZC, hot_correction=1)
    assert 0.7 * op.thomson(BS05_XC) < hot < op.thomson(BS05_XC)
    T = np.logspace(4, 10, 50)
    assert np.all(es.kappa(1.0, T, 0.7, 0.02, hot_correction=1) <= op.thomson(0.7))
    half = es.kappa(1e-8, 4.5e8, 0.7, 0.02, hot_correction=0.5)
    assert half == pytest.approx(0.75 * op.thomson(0.7), rel=1e-3)


# -- Kramers -----------------------------------------------------------------------------

def test_kramers_coefficients_exactly():
    # Carroll & Ostlie 1996, eqs. 9.22-9.23 in cgs (REFERENCES.md):
    # bound-free 4.34e25 (g_bf/t) Z (1+X) rho T^-3.5, free-free 3.68e22 g_ff (1-Z)(1+X) rho T^-3.5.
    kr = BY_NAME["kramers"]
    rho, T, X, Z = 1.0, 1e6, 0.7, 0.02
    ff_only = kr.kappa(rho, T, X, 0.0, guillotine=1.0)
    assert ff_only == pytest.approx(3.68e22 * 1.0 * (1 + X) * rho * T**-3.5, rel=1e-12)
    both = kr.kappa(rho, T, X, Z, g_bf=2.0, g_ff=0.5, guillotine=4.0)
    expected = (4.34e25 * (2.0 / 4.0) * Z + 3.68e22 * 0.5 * (1 - Z)) * (1 + X) * rho * T**-3.5
    assert both == pytest.approx(expected, rel=1e-12)


def test_kramers_scalings():
    # Kramers: kappa proportional to rho T^-3.5 (Carroll & Ostlie 1996, eqs. 9.22-9.23),
    # with the guillotine factor held fixed.
    kr = BY_NAME["kramers"]
    assert _slope(lambda r: kr.kappa(r, 1e6, 0.7, 0.02, guillotine=3.0), 0.5) == pytest.approx(1.0, abs=1e-6)
    assert _slope(lambda T: kr.kappa(0.5, T, 0.7, 0.02, guillotine=3.0), 1e6) == pytest.approx(-3.5, abs=1e-6)
    # With the density fit t ~ rho^0.2 the bound-free part scales as rho^0.8.
    bf = _slope(lambda r: op.kramers_bound_free(r, 1e6, 0.7, 0.02), 10.0)
    assert bf == pytest.approx(0.8, abs=1e-6)


def test_guillotine_fit_and_its_range():
    # Novotny 1973 (p. 469) fit t = 0.708 (rho (1+X))^0.2 with rho in kg/m^3, i.e.
    # 2.82 (rho(1+X))^0.2 in g/cm^3; Carroll & Ostlie 1996 put t between 1 and 100.
    assert op.guillotine_fit(1.0, 0.0) == pytest.approx(0.708 * 1000**0.2, rel=1e-12)
    assert op.guillotine_fit(1.0, 0.0) == pytest.approx(2.82, rel=1e-3)
    rho = np.logspace(-2, 3, 30)  # stellar interiors
    t = op.guillotine_fit(rho, 0.7)
    assert np.all((t > 1) & (t < 100))
    # Clipped, not extrapolated, in tenuous gas; a fixed t >= 1 overrides the fit.
    assert op.guillotine_fit(1e-9, 0.7) == 1.0
    assert op.guillotine_factor(1e-9, 0.7, 5.0) == 5.0
    assert op.guillotine_factor(10.0, 0.7, 0.5) == pytest.approx(op.guillotine_fit(10.0, 0.7))


# -- H-minus -------------------------------------------------------------------------------

def test_h_minus_coefficient_and_scalings():
    # Carroll & Ostlie 1996, eq. 9.28 in cgs: 2.5e-31 (Z/0.02) rho^0.5 T^9.
    hm = BY_NAME["h-minus"]
    rho, T = 1e-7, 5000.0
    assert hm.kappa(rho, T, 0.7, 0.02) == pytest.approx(2.5e-31 * rho**0.5 * T**9, rel=1e-12)
    assert hm.kappa(rho, T, 0.7, 0.01) == pytest.approx(0.5 * 2.5e-31 * rho**0.5 * T**9, rel=1e-12)
    assert _slope(lambda r: hm.kappa(r, T, 0.7, 0.02), rho) == pytest.approx(0.5, abs=1e-6)
    assert _slope(lambda t: hm.kappa(rho, t, 0.7, 0.02), T) == pytest.approx(9.0, abs=1e-6)


def test_h_minus_stays_positive_without_metals():
    assert BY_NAME["h-minus"].kappa(1e-7, 5000.0, 0.75, 0.0) > 0


# -- combined ------------------------------------------------------------------------------

def test_combined_at_the_solar_centre_is_near_tabulated_opacity():
    # OPAL-like opacity at the solar centre ~1-2 cm^2/g (from memory); the analytic law
    # should be within a factor ~3 (REFERENCES.md: good to a factor ~2).
    k = BY_NAME["combined"].kappa(BS05_RHOC, BS05_TC, BS05_XC, BS05_ZC)
    assert 1.0 / 3 < k < 2.0 * 3


def test_combined_limits():
    c = BY_NAME["combined"]
    # Hot and tenuous: electron scattering (common practice, no source) plus the 0.1 Z floor.
    assert c.kappa(1e-6, 1e8, 0.7, 0.02) == pytest.approx(op.thomson(0.7) + 0.1 * 0.02, rel=1e-4)
    # Cool photosphere-like gas: H-minus plus the molecular floor, far below Kramers.
    rho, T = 1e-7, 5000.0
    assert c.kappa(rho, T, 0.7, 0.02) == pytest.approx(op.h_minus(rho, T, 0.02) + 0.1 * 0.02, rel=1e-3)
    # Very cool: the molecular floor 0.1 Z.
    assert c.kappa(1e-10, 3000.0, 0.7, 0.02) == pytest.approx(0.1 * 0.02, rel=0.05)
    # Interior, H-minus negligible: electron scattering + Kramers.
    kr = BY_NAME["kramers"].kappa(1.0, 1e6, 0.7, 0.02)
    assert c.kappa(1.0, 1e6, 0.7, 0.02) == pytest.approx(op.thomson(0.7) + kr + 0.002, rel=1e-6)


@pytest.mark.parametrize("Z", [0.0, 0.001, 0.02, 0.04])
def test_combined_positive_finite_smooth_on_dense_grid(Z):
    T = np.logspace(np.log10(3e3), 8, 500)
    rho = np.logspace(-10, 3, 400)
    k = BY_NAME["combined"].kappa(rho[None, :], T[:, None], 0.7, Z)
    assert k.shape == (500, 400)
    assert np.all(np.isfinite(k)) and np.all(k > 0)
    # No jump above a factor 2 between neighbours along either axis.
    lk = np.log(k)
    assert np.abs(np.diff(lk, axis=0)).max() < np.log(2)
    assert np.abs(np.diff(lk, axis=1)).max() < np.log(2)


def test_all_laws_positive_and_finite_far_outside_their_ranges():
    rho = np.logspace(-14, 8, 60)[None, :]
    T = np.logspace(0, 11, 70)[:, None]
    for law in LAWS:
        with np.errstate(all="raise"):
            k = law.kappa(rho, T, 0.7, 0.02)
        assert np.all(np.isfinite(k)), law.name
        assert np.all(k > 0), law.name


def test_surface_zeros_give_finite_values():
    for law in LAWS:
        k = law.kappa(np.array([0.0, 1e-8]), np.array([0.0, 4000.0]), 0.7, 0.02)
        assert np.all(np.isfinite(k)) and np.all(k >= 0), law.name


# -- broadcasting --------------------------------------------------------------------------

@pytest.mark.parametrize("law", LAWS, ids=lambda l: l.name)
def test_broadcasting_matches_a_loop(law):
    rng = np.random.default_rng(4)
    n, g = 5, 7
    rho = 10 ** rng.uniform(-9, 2, (n, g))
    T = 10 ** rng.uniform(3.5, 7.5, (n, g))
    X = rng.uniform(0.3, 0.75, (n, 1))
    Z = rng.uniform(0.002, 0.03, (n, 1))
    params = {p.name: rng.uniform(max(p.lower, 1.0) if p.name == "guillotine" else p.lower,
                                  min(p.upper, 10.0), (n, 1)) for p in law.params}
    params = {k: (np.round(v) if k == "hot_correction" else v) for k, v in params.items()}
    full = law.kappa(rho, T, X, Z, **params)
    assert full.shape == (n, g)
    for i in range(n):
        one = law.kappa(rho[i], T[i], X[i, 0], Z[i, 0], **{k: v[i, 0] for k, v in params.items()})
        np.testing.assert_allclose(full[i], one, rtol=1e-13)
    # all [n] and scalars
    flat = law.kappa(rho[:, 0], T[:, 0], X[:, 0], Z[:, 0], **{k: v[:, 0] for k, v in params.items()})
    np.testing.assert_allclose(flat, full[:, 0], rtol=1e-13)
    scalar = law.kappa(float(rho[0, 0]), float(T[0, 0]), float(X[0, 0]), float(Z[0, 0]),
                       **{k: float(v[0, 0]) for k, v in params.items()})
    assert np.ndim(scalar) == 0 and scalar == pytest.approx(full[0, 0], rel=1e-13)


def test_shape_follows_params_even_when_the_field_does_not_depend_on_them():
    es = BY_NAME["electron-scattering"]
    assert es.kappa(1.0, 1e6, 0.7, 0.02, hot_correction=np.zeros((3, 1))).shape == (3, 1)
    assert es.kappa(np.ones((3, 4)), 1e6, 0.7, 0.02).shape == (3, 4)


def test_bound_opacity_lifts_per_sample_params():
    c = BY_NAME["combined"]
    rho = np.full((3, 4), 1.0)
    T = np.full((3, 4), 1e6)
    g_bf = np.array([0.5, 1.0, 2.0])
    bound = BoundOpacity(c, {"g_bf": g_bf})
    k = bound(rho, T, np.full(3, 0.7), np.full(3, 0.02))
    for i in range(3):
        np.testing.assert_allclose(k[i], c.kappa(1.0, 1e6, 0.7, 0.02, g_bf=g_bf[i]), rtol=1e-13)
