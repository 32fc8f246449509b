"""Polytrope physics and the built-in profile components."""

import math

import numpy as np
import pytest
from scipy.integrate import cumulative_simpson
from scipy.interpolate import CubicSpline

from plugins import profiles
from radwalk import constants as const
from radwalk.errors import ConfigError, ModelError
from radwalk.host.components import Profile, ProfileModel
from radwalk.host.params import Param, Validity
from radwalk.physics import lane_emden as le
from radwalk.physics.composition import mu
from radwalk.physics.polytrope import (
    eddington_beta,
    eddington_constant,
    polytrope_structure,
    temperature_from_pressure,
)
from radwalk.plugins.profiles import EddingtonStandard, Polytrope

SUN = dict(M=np.array([const.M_SUN]), R=np.array([const.R_SUN]), X=np.array([0.7]), Z=np.array([0.02]))


def rel(a, b):
    return np.abs(np.asarray(a) / np.asarray(b) - 1.0)


# --- equation of state -------------------------------------------------------

def test_temperature_inverts_the_equation_of_state():
    rng = np.random.default_rng(7)
    T = 10.0 ** rng.uniform(3, 9.5, (50, 40))
    rho = 10.0 ** rng.uniform(-12, 4, (50, 40))
    m = rng.uniform(0.5, 2.0, (50, 1))  # broadcasts per row
    P_gas = rho * const.K_B * T / (m * const.M_U)
    P_rad = const.A_RAD * T**4 / 3.0
    T_out, beta = temperature_from_pressure(P_gas + P_rad, rho, m)
    assert T_out.shape == T.shape
    assert rel(T_out, T).max() < 1e-10
    assert rel(beta, P_gas / (P_gas + P_rad)).max() < 1e-9
    # the sample spans both limits
    assert beta.min() < 1e-6 and beta.max() > 1 - 1e-6


def test_temperature_limits():
    P = np.array([1e17, 1e10, 0.0, -1.0])
    rho = np.array([1e-12, 0.0, 1.0, 1.0])
    T, beta = temperature_from_pressure(P, rho, 0.6)
    # radiation-dominated: a T^4 / 3 = P
    assert T[0] == pytest.approx((3 * P[0] / const.A_RAD) ** 0.25, rel=1e-12)
    assert beta[0] < 1e-8
    # pure radiation
    assert T[1] == pytest.approx((3 * P[1] / const.A_RAD) ** 0.25, rel=1e-14)
    assert beta[1] == 0.0
    # no pressure, no temperature
    assert T[2] == 0.0 and beta[2] == 1.0
    assert np.isnan(T[3]) and np.isnan(beta[3])
    # gas-dominated: the ideal-gas temperature
    Tg, bg = temperature_from_pressure(1e5, 1.0, 0.6)
    assert Tg == pytest.approx(1e5 * 0.6 * const.M_U / const.K_B, rel=1e-12)
    assert bg == pytest.approx(1.0, abs=1e-12)


# --- Eddington's standard model ------------------------------------------------

def test_eddington_constant():
    C = eddington_constant()
    assert C == pytest.approx(0.00299, abs=5e-6)  # REFERENCES.md, computed
    assert round(C, 3) == 0.003  # textbook value (Carroll & Ostlie 1996; Prialnik 2000)


def test_eddington_beta_of_the_sun():
    b = eddington_beta(const.M_SUN, 0.61)
    assert b == pytest.approx(0.99959, abs=5e-6)  # REFERENCES.md, computed


def test_eddington_beta_solves_the_quartic_vectorised():
    M = np.geomspace(0.1, 1000.0, 40) * const.M_SUN
    m = np.linspace(0.5, 1.5, 40)
    b = eddington_beta(M, m)
    assert b.shape == (40,)
    c = eddington_constant() * (M / const.M_SUN) ** 2 * m**4
    np.testing.assert_allclose(1.0 - b, c * b**4, rtol=1e-10, atol=1e-15)
    # heavier stars hold more of their pressure in radiation
    b_fixed_mu = eddington_beta(M, 0.6)
    assert np.all(np.diff(b_fixed_mu) < 0) and 0.0 < b_fixed_mu[-1] < 0.5


def test_eddington_beta_rejects_bad_mass():
    with pytest.raises(ModelError, match="positive finite masses"):
        eddington_beta(np.array([const.M_SUN, -1.0]), 0.6)


def test_eddington_profile_is_self_consistent():
    M = np.array([0.8, 3.0, 30.0]) * const.M_SUN
    R = np.array([0.8, 2.5, 9.0]) * const.R_SUN
    X = np.array([0.7, 0.72, 0.68])
    Z = np.array([0.02, 0.014, 0.03])
    p = EddingtonStandard().profile(M, R, X, Z)
    # constant beta, and radiation pressure (1 - beta) P = a T^4 / 3 everywhere:
    # the quartic's constant and omega_3 are consistent with the n = 3 profile
    np.testing.assert_allclose(p.beta, eddington_beta(M, mu(X, Z))[:, None] * np.ones_like(p.P), rtol=0)
    np.testing.assert_allclose((1.0 - p.beta) * p.P, const.A_RAD * p.T**4 / 3.0, rtol=1e-9)
    # and the full gas + radiation EOS on the n = 3 polytrope gives the same T
    q = Polytrope().profile(M, R, X, Z, n=3.0)
    np.testing.assert_allclose(q.T, p.T, rtol=1e-9)
    np.testing.assert_allclose(q.beta, p.beta, rtol=1e-9)


def test_eddington_outside_mass_range_is_reported(registry):
    from radwalk.forward.stages import StageSet

    stages = StageSet.build(registry, {"profile": "eddington-standard"})
    values = {"mass": np.array([0.2, 1.0]), "X": np.array([0.7, 0.7]), "Z": np.array([0.02, 0.02])}
    msgs = stages.validity_messages(values)
    assert any("eddington-standard" in m and "mass" in m and "50%" in m for m in msgs), msgs


# --- a Sun-like polytrope -----------------------------------------------------

def test_sun_like_n3_polytrope():
    p = polytrope_structure(3.0, **SUN)
    # REFERENCES.md: rho_c = 76.4 g/cm^3 and P_c = 1.245e17 dyn/cm^2 (computed)
    assert p.rho[0, 0] == pytest.approx(76.4, rel=1e-3)
    assert p.P[0, 0] == pytest.approx(1.245e17, rel=1e-3)
    # Cox 1968, Table 23.1: P_c = 1.242e17 with older constants
    assert p.P[0, 0] == pytest.approx(1.242e17, rel=5e-3)
    # T_c ~ 1.2e7 K (textbook: Carroll & Ostlie 1996; Kippenhahn, Weigert & Weiss 2012)
    assert p.T[0, 0] == pytest.approx(1.2e7, rel=0.03)
    # mean density from the profile's own mass integral
    assert p.m[0, -1] == pytest.approx(const.M_SUN, rel=1e-12)


@pytest.mark.parametrize("n, k_n", [(3.0, 0.8543), (1.5, 0.5385)])  # REFERENCES.md, computed
def test_central_temperature_coefficient_ideal_gas_limit(n, k_n):
    # a light star: radiation pressure ~1e-6 of the total, so T_c is the ideal-gas one
    M, R, X, Z = 0.1 * const.M_SUN, 0.1 * const.R_SUN, 0.7, 0.02
    p = polytrope_structure(n, np.array([M]), np.array([R]), np.array([X]), np.array([Z]))
    assert p.beta[0, 0] > 1 - 1e-5
    coeff = p.T[0, 0] * const.K_B * R / (const.G * M * mu(X, Z) * const.M_U)
    assert coeff == pytest.approx(k_n, abs=6e-5)


@pytest.mark.parametrize("n", [1.0, 1.5, 3.0, 4.0])
def test_hydrostatic_equilibrium_and_mass(n):
    M = np.array([1.3 * const.M_SUN])
    R = np.array([1.6 * const.R_SUN])
    p = polytrope_structure(n, M, R, np.array([0.7]), np.array([0.02]))
    r, P, rho, m = p.r[0], p.P[0], p.rho[0], p.m[0]
    bulk = (le.GRID > 0.02) & (le.GRID < 0.9)
    expected = -const.G * m[bulk] * rho[bulk] / r[bulk] ** 2
    # second-order finite differences on the ~0.005 R step: truncation ~1e-3 to 1e-2
    assert rel(np.gradient(P, r)[bulk], expected).max() < 2e-2
    # a cubic spline's derivative is fourth-order and holds it much tighter
    assert rel(CubicSpline(r, P)(r[bulk], 1), expected).max() < 1e-4
    # mass from integrating 4 pi r^2 rho matches m = M q
    m_int = cumulative_simpson(4 * math.pi * r**2 * rho, x=r, initial=0.0)
    outer = le.GRID > 0.1
    assert rel(m_int[outer], m[outer]).max() < 2e-5
    assert m_int[-1] == pytest.approx(M[0], rel=1e-6)
    assert m[-1] == pytest.approx(M[0], rel=1e-9)  # the mass outside s = 1 - 1e-6 is negligible
    # everything positive and T > 0 to the last point
    assert np.all(p.T > 0) and np.all(p.rho > 0) and np.all(p.P > 0)


def test_profile_shapes_and_grid():
    k = 3
    p = Polytrope().profile(
        np.full(k, const.M_SUN), np.full(k, const.R_SUN), np.full(k, 0.7), np.full(k, 0.02), n=2.0
    )
    assert isinstance(p, Profile)
    for a in (p.r, p.m, p.rho, p.P, p.T, p.beta):
        assert a.shape == (k, le.GRID.size) and np.all(np.isfinite(a))
    for a in (p.M, p.R, p.X, p.Z):
        assert a.shape == (k,)
    assert p.r[0, 0] == 0.0 and p.r[0, -1] == pytest.approx(const.R_SUN * (1 - 1e-6), rel=1e-15)
    assert np.all(np.diff(p.T, axis=1) < 0)


def test_vectorised_samples_match_separate_calls():
    rng = np.random.default_rng(3)
    k = 5
    n = np.array([1.5, 2.1, 2.9, 3.3, 4.2])
    M = rng.uniform(0.5, 5.0, k) * const.M_SUN
    R = rng.uniform(0.5, 3.0, k) * const.R_SUN
    X = rng.uniform(0.6, 0.75, k)
    Z = rng.uniform(0.005, 0.03, k)
    together = Polytrope().profile(M, R, X, Z, n=n)
    for i in range(k):
        alone = Polytrope().profile(M[i : i + 1], R[i : i + 1], X[i : i + 1], Z[i : i + 1], n=n[i])
        for name in ("r", "m", "rho", "P", "T", "beta"):
            a, b = getattr(together, name)[i], getattr(alone, name)[0]
            # interpolation tolerance of the index table (exact for a single index);
            # rho ~ theta^n amplifies theta's error n-fold
            np.testing.assert_allclose(a, b, rtol=2e-5, atol=0, err_msg=name)


def test_scalar_and_lifted_inputs_broadcast():
    p = Polytrope().profile(const.M_SUN, const.R_SUN, 0.7, 0.02, n=3.0)
    q = polytrope_structure(3.0, **SUN)
    np.testing.assert_array_equal(p.T, q.T)
    # per-sample values already shaped [k, 1] to broadcast against a field
    M = np.array([1.0, 2.0]) * const.M_SUN
    R = np.array([1.0, 1.7]) * const.R_SUN
    X, Z = np.array([0.7, 0.71]), np.array([0.02, 0.015])
    for comp, kw in ((Polytrope(), {"n": np.array([[2.5], [3.1]])}), (EddingtonStandard(), {})):
        a = comp.profile(M, R, X, Z, **kw)
        b = comp.profile(M[:, None], R[:, None], X[:, None], Z[:, None], **kw)
        assert b.T.shape == (2, le.GRID.size)
        np.testing.assert_array_equal(a.T, b.T)


# --- components ---------------------------------------------------------------

def test_hook_provides_both_components():
    comps = profiles.radwalk_profiles()
    assert [c.name for c in comps] == ["polytrope", "eddington-standard"]
    for c in comps:
        assert isinstance(c, ProfileModel)
        assert isinstance(c.validity, Validity) and c.description and "\n" not in c.description
        assert all(isinstance(p, Param) for p in c.params)


def test_polytrope_parameter_declaration():
    (p,) = Polytrope.params
    assert (p.name, p.unit, p.lower, p.upper, p.default, p.sampled) == ("n", "", 0.0, 4.99, 3.0, True)
    prior = p.default_prior()
    assert (prior.kind, prior.lower, prior.upper) == ("uniform", 1.5, 3.5)
    assert EddingtonStandard.params == () and EddingtonStandard.validity.mass == (0.5, 100.0)


@pytest.mark.parametrize("bad", [5.0, -0.1, float("nan")])
def test_polytrope_rejects_bad_index(bad):
    with pytest.raises(ConfigError) as info:
        Polytrope().profile(**SUN, n=np.array([bad]))
    assert str(bad) in str(info.value) and "[0, 4.99]" in str(info.value)
    with pytest.raises(ConfigError, match=r"0 <= n < 5"):
        polytrope_structure(bad, **SUN)


def test_structure_rejects_bad_mass_or_radius():
    with pytest.raises(ModelError, match="positive finite mass"):
        polytrope_structure(3.0, np.array([0.0]), SUN["R"], 0.7, 0.02)
    with pytest.raises(ModelError, match="positive finite radius"):
        polytrope_structure(3.0, SUN["M"], np.array([np.nan]), 0.7, 0.02)
    with pytest.raises(ModelError, match="per-sample array of length 3"):
        polytrope_structure(np.array([3.0, 2.0]), np.ones(3) * const.M_SUN, const.R_SUN, 0.7, 0.02)
