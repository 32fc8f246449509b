"""Parts of the structure solver: mesh, mixing-length convection, grey atmosphere, Jacobian."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from test_structure_idealised import electron_scattering, ideal_eos

from radwalk import constants as const
from radwalk.errors import ConfigError
from radwalk.physics.structure.atmosphere import photosphere
from radwalk.physics.structure.convection import mlt_gradient, radiative_gradient
from radwalk.physics.structure.mesh import mass_mesh


# --------------------------------------------------------------------------- mesh
def test_mesh_shape():
    q = mass_mesh(400)
    assert q.shape == (400,) and q[0] == 0.0 and q[-1] == 1.0
    assert np.all(np.diff(q) > 0.0)
    assert 1e-13 < 1.0 - q[-2] < 1e-11  # the point next to the photosphere
    assert q[1] < 1e-3  # dense toward the centre
    depth = 1.0 - q[1:-1]
    per_decade = np.histogram(np.log10(depth), bins=np.arange(-12, -1))[0]
    assert per_decade.min() >= 8  # every decade of 1 - q from 1e-12 to 1e-2 resolved at n = 400


def test_mesh_refuses_bad_sizes():
    with pytest.raises(ConfigError, match="n_mesh"):
        mass_mesh(10)


# --------------------------------------------------------------------------- convection
def _mlt_case(W, alpha=1.8, scale=1.0, kappa=50.0):
    # A solar-envelope-like point (order of magnitude, no source): T, rho, P consistent with an ideal gas.
    T = 1e5
    rho = 1e-5 * scale
    st = ideal_eos(rho, T, 0.7, 0.02)
    m, r = const.M_SUN, 0.95 * const.R_SUN
    g = const.G * m / r**2
    nabla_ad = float(st.nabla_ad)
    nabla_rad = nabla_ad + W
    L = nabla_rad * 16.0 * math.pi * const.A_RAD * const.C * const.G * m * T**4 / (3.0 * kappa * st.P)
    conv = mlt_gradient(nabla_rad, nabla_ad, T=T, rho=rho, P=st.P, kappa=kappa, c_P=st.c_P, delta=st.delta, g=g,
                        alpha=alpha)
    return conv, dict(T=T, rho=rho, st=st, kappa=kappa, m=m, r=r, g=g, L=L, nabla_rad=nabla_rad, nabla_ad=nabla_ad,
                      alpha=alpha)


@pytest.mark.parametrize("W", [1e-6, 1e-3, 0.1, 10.0, 1e3])
@pytest.mark.parametrize("scale", [1e-3, 1.0, 1e3])
def test_mlt_fluxes_add_up(W, scale):
    """Radiative plus convective flux (KWW 2012 eqs. 7.6, 7.7) equals L / (4 pi r^2)."""
    conv, c = _mlt_case(W, scale=scale)
    st = c["st"]
    H_P = st.P / (c["rho"] * c["g"])
    ell = c["alpha"] * H_P
    nabla = float(conv.nabla)
    assert c["nabla_ad"] < nabla <= c["nabla_rad"]
    # nabla - nabla_e from the velocity, v^2 = g delta (nabla - nabla_e) l^2 / (8 H_P)  (KWW eq. 7.6)
    dn = float(conv.v_conv) ** 2 * 8.0 * H_P / (c["g"] * st.delta * ell**2)
    f_con = (c["rho"] * st.c_P * c["T"] * math.sqrt(c["g"] * st.delta) * ell**2 * H_P**-1.5 * dn**1.5
             / (4 * math.sqrt(2)))
    f_rad = (4.0 * const.A_RAD * const.C * const.G * c["T"] ** 4 * c["m"] * nabla
             / (3.0 * c["kappa"] * st.P * c["r"] ** 2))
    total = c["L"] / (4.0 * math.pi * c["r"] ** 2)
    assert (f_con + f_rad) / total == pytest.approx(1.0, rel=1e-9)
    assert float(conv.conv_flux_fraction) == pytest.approx(f_con / total, rel=1e-8, abs=1e-14)


def test_mlt_continuous_at_the_boundary():
    below, _ = _mlt_case(-1e-9)
    above, _ = _mlt_case(1e-9)
    assert not below.convective and above.convective
    assert float(above.nabla) - float(below.nabla) == pytest.approx(2e-9, rel=1e-3)


def test_mlt_limits():
    """Efficient convection (dense, U -> 0) gives nabla_ad; inefficient (tenuous) gives nabla_rad."""
    dense, c = _mlt_case(0.5, scale=1e6)
    assert float(dense.nabla) - c["nabla_ad"] < 1e-4 * 0.5
    thin, c = _mlt_case(0.5, kappa=1e-6)  # transparent gas: radiation carries the flux
    assert c["nabla_rad"] - float(thin.nabla) < 1e-2 * 0.5
    # At the centre g = 0: adiabatic, zero velocity, no NaN.
    centre = mlt_gradient(0.6, 0.4, T=1.5e7, rho=100.0, P=2e17, kappa=1.0, c_P=3e8, delta=1.0, g=0.0, alpha=1.8)
    assert float(centre.nabla) == 0.4 and float(centre.v_conv) == 0.0


def test_radiative_gradient_value():
    # KWW 2012 eq. 5.28 by hand for a round-number point.
    v = radiative_gradient(1.0, 2.0, 1e17, 1e7)
    assert float(v) == pytest.approx(3.0 * 2.0 * 1e17 / (16 * math.pi * const.A_RAD * const.C * const.G * 1e28))


# --------------------------------------------------------------------------- atmosphere
def test_grey_atmosphere_constant_opacity_exact():
    """Constant kappa: P_gas(2/3) = (2/3)(g / kappa - sigma T_eff^4 / c) exactly; P adds a T_eff^4 / 3."""
    g, T_eff = np.array([2.7e4, 1e4]), np.array([5772.0, 30000.0])
    ph = photosphere(g, T_eff, 0.7, 0.02, electron_scattering, ideal_eos)
    kes = electron_scattering(1.0, 1.0, 0.7, 0.02)
    expect = (2.0 / 3.0) * (g / kes - const.SIGMA_SB * T_eff**4 / const.C) + const.A_RAD * T_eff**4 / 3.0
    assert ph.P == pytest.approx(expect, rel=1e-10)
    assert ph.T == pytest.approx(T_eff, rel=1e-14)


def test_grey_atmosphere_against_ode():
    """Variable (H-minus dominated) opacity: against an adaptive ODE integration of dP/dtau = g / kappa."""
    from radwalk.plugins.opacity import Combined

    law = Combined()

    def kap(rho, T, X, Z):
        return law.kappa(rho, T, X, Z)

    g, T_eff = 2.74e4, 5772.0
    ph = photosphere(g, T_eff, 0.7, 0.02, kap, ideal_eos)

    def rho_of(P_gas, T):
        return P_gas * float(ideal_eos(1.0, T, 0.7, 0.02).mu) * const.M_U / (const.K_B * T)

    def rhs(tau, y):
        T = T_eff * (0.75 * (tau + 2.0 / 3.0)) ** 0.25
        return [g / kap(rho_of(y[0], T), T, 0.7, 0.02) - const.SIGMA_SB * T_eff**4 / const.C]

    tau0 = 1e-10
    T0 = T_eff * 0.5**0.25
    # start: P_gas ~ (1 + a) g tau / kappa with a = 1/2 for H-minus (kappa ~ rho^(1/2)), iterate once
    p0 = 1.5 * g * tau0 / kap(rho_of(1.0, T0), T0, 0.7, 0.02) ** (2 / 3)
    p0 = (1.5 * g * tau0 / kap(rho_of(p0, T0), T0, 0.7, 0.02))
    sol = solve_ivp(rhs, (tau0, 2.0 / 3.0), [p0], rtol=1e-10, atol=1e-12)
    p_gas = sol.y[0, -1]
    assert ph.P - const.A_RAD * T_eff**4 / 3.0 == pytest.approx(p_gas, rel=2e-3)
