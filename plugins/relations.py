"""Built-in mass-radius-luminosity relations: homology and Eddington's model.

Both use a chemically homogeneous n = 3 polytrope as the template of the
star's structure (its shape fixed, its scale set by M and R):

* the luminosity follows from radiative transfer with the chosen opacity law
  evaluated at the template's half-mass point, so L ~ mu^4 M^3 / kappa and a
  different opacity law gives a different L (homology: Kippenhahn, Weigert &
  Weiss 2012, ch. 20; Carroll & Ostlie 1996, ch. 10);
* the radius is where that luminosity equals the pp + CNO energy generated
  in the template (thermal equilibrium), found by a bracketed root search in
  log R that runs vectorised over samples.

The homology relation has two calibration constants, fixed once so that a
1 M_sun star of solar composition (Asplund et al. 2009) with the default
opacity law (``combined``) has the nominal solar R and L (IAU 2015).  The
Eddington relation has none for L: its luminosity is Eddington's
L = 4 pi c G M (1 - beta) / kappa with beta from his quartic.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from radwalk import constants as k
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Validity
from radwalk.physics import lane_emden
from radwalk.physics.composition import X_SUN, Z_SUN, mu
from radwalk.physics.nuclear import nuclear_rates
from radwalk.physics.polytrope import eddington_beta

TEMPLATE_INDEX = 3.0
_LOG_R_BRACKET = (np.log(0.02 * k.R_SUN), np.log(300.0 * k.R_SUN))
_ROOT_ITERATIONS = 60
_ROOT_TOL = 1e-9  # in ln R


@lru_cache(maxsize=1)
def _template():
    """n = 3 structure in units of the central values, and quadrature weights in m/M."""
    sol = lane_emden.solve(TEMPLATE_INDEX)
    s = lane_emden.GRID
    theta = sol.theta
    q = sol.q
    half = np.interp(0.5, q, theta)  # theta at the half-mass point
    # Energy generation sits in the core: integrate eps dm over the inner 60 % of the radius
    # (over 95 % of the mass of an n = 3 polytrope), trapezoid weights in m/M.
    inner = s <= 0.6
    qi = q[inner]
    w = np.zeros_like(qi)
    dq = np.diff(qi)
    w[:-1] += 0.5 * dq
    w[1:] += 0.5 * dq
    return sol, half, theta[inner], w


def central_conditions(M, R, X, Z):
    """Ideal-gas central density (g/cm^3) and temperature (K) of the n = 3 template."""
    sol = _template()[0]
    rho_c = sol.density_ratio * 3.0 * M / (4.0 * np.pi * R**3)
    P_c = sol.W * k.G * M**2 / R**4
    T_c = P_c * mu(X, Z) * k.M_U / (rho_c * k.K_B)
    return rho_c, T_c


def characteristic_point(M, R, X, Z):
    """Density and temperature at the template's half-mass point, where kappa is evaluated."""
    rho_c, T_c = central_conditions(M, R, X, Z)
    half = _template()[1]
    return rho_c * half**3, T_c * half


def nuclear_luminosity(M, R, X, Z):
    """pp + CNO luminosity (erg/s) of the template of mass M and radius R."""
    _, _, theta, w = _template()
    rho_c, T_c = central_conditions(M, R, X, Z)
    rho = rho_c[:, None] * theta**3
    T = T_c[:, None] * theta
    eps = nuclear_rates(rho, T, X[:, None], Z[:, None]).eps
    return M * (eps @ w)


def radiative_luminosity(M, R, X, Z, opacity):
    """Uncalibrated radiative luminosity a c R^4 T_c^4 / (kappa M), erg/s."""
    rho_h, T_h = characteristic_point(M, R, X, Z)
    _, T_c = central_conditions(M, R, X, Z)
    kappa = opacity(rho_h, T_h, X, Z)
    return k.A_RAD * k.C * R**4 * T_c**4 / (kappa * M)


def solve_radius(log_excess, n):
    """Root in ln R of an increasing function ``log_excess(lnR) -> [n]`` (Illinois method).

    Returns NaN where the bracket does not hold a root (no main-sequence
    radius balances the luminosity for that mass and composition).
    """
    a = np.full(n, _LOG_R_BRACKET[0])
    b = np.full(n, _LOG_R_BRACKET[1])
    with np.errstate(all="ignore"):
        fa = log_excess(a)
        fb = log_excess(b)
        ok = (fa < 0) & (fb > 0)
        x = 0.5 * (a + b)
        side = np.zeros(n)
        for _ in range(_ROOT_ITERATIONS):
            x_old = x
            x = np.where(ok, (a * fb - b * fa) / (fb - fa), x)
            fx = log_excess(x)
            left = fx < 0
            # Illinois: halve the kept end's value when the same end is replaced twice running.
            fa, fb = (
                np.where(left, fx, np.where(side > 0, 0.5 * fa, fa)),
                np.where(left, np.where(side < 0, 0.5 * fb, fb), fx),
            )
            a = np.where(left, x, a)
            b = np.where(left, b, x)
            side = np.where(left, -1.0, 1.0)
            if np.all(~ok | (np.abs(x - x_old) < _ROOT_TOL)):
                break
    return np.where(ok, x, np.nan)


def _safe_log(v):
    with np.errstate(divide="ignore"):
        return np.log(np.maximum(v, 1e-300))


@lru_cache(maxsize=1)
def _calibration():
    """(C_L, C_E) making the solar-composition 1 M_sun star the nominal Sun."""
    from radwalk.physics.opacity import default_kappa

    M = np.array([k.M_SUN])
    R = np.array([k.R_SUN])
    X = np.array([X_SUN])
    Z = np.array([Z_SUN])
    c_l = k.L_SUN / radiative_luminosity(M, R, X, Z, default_kappa)[0]
    c_e = k.L_SUN / nuclear_luminosity(M, R, X, Z)[0]
    return float(c_l), float(c_e)


class Homology:
    name = "homology"
    description = "main-sequence R and L from homology with the chosen opacity, radius from pp + CNO burning"
    params = ()
    gridded = True  # a pure function of (M, X, Z) for a fixed opacity: may be interpolated
    validity = Validity(
        mass=(0.5, 20.0),
        X=(0.5, 0.8),
        Z=(1e-4, 0.05),
        note="chemically homogeneous main sequence; n = 3 radiative template, poorer for "
        "mostly convective stars below ~0.5 M_sun and radiation-dominated ones above ~20 M_sun",
    )

    def predict(self, M, X, Z, opacity, **params):
        M, X, Z = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (M, X, Z))
        c_l, c_e = _calibration()

        def log_excess(lnR):
            R = np.exp(lnR)
            return _safe_log(c_l * radiative_luminosity(M, R, X, Z, opacity)) - _safe_log(
                c_e * nuclear_luminosity(M, R, X, Z)
            )

        R = np.exp(solve_radius(log_excess, M.size))
        L = c_l * radiative_luminosity(M, R, X, Z, opacity)
        return R, L


class Eddington:
    name = "eddington"
    description = "Eddington's standard model luminosity with the chosen opacity, radius from pp + CNO burning"
    params = ()
    gridded = True
    validity = Validity(
        mass=(1.0, 100.0),
        X=(0.5, 0.8),
        Z=(1e-4, 0.05),
        note="n = 3 with constant gas-pressure fraction; no calibration, so good to a factor of a few",
    )

    def predict(self, M, X, Z, opacity, **params):
        M, X, Z = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (M, X, Z))
        beta = eddington_beta(M, mu(X, Z))
        c_e = _calibration()[1]

        def lum(R):
            rho_h, T_h = characteristic_point(M, R, X, Z)
            return 4.0 * np.pi * k.C * k.G * M * (1.0 - beta) / opacity(rho_h, T_h, X, Z)

        def log_excess(lnR):
            R = np.exp(lnR)
            return _safe_log(lum(R)) - _safe_log(c_e * nuclear_luminosity(M, R, X, Z))

        R = np.exp(solve_radius(log_excess, M.size))
        return R, lum(R)


@hookimpl
def radwalk_relations():
    return [Homology(), Eddington()]
