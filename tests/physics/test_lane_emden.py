"""Lane–Emden solutions: published tables, analytic cases, the index table, bad input."""

import math

import numpy as np
import pytest

from radwalk.errors import ConfigError
from radwalk.physics import lane_emden as le


def rel(a, b):
    return np.abs(np.asarray(a) / np.asarray(b) - 1.0)


# --- published values ------------------------------------------------------

# (n, xi1, omega_n, rho_c/rho_mean, W_n)
PUBLISHED = [
    # xi1: Boyd 2011 (doi:10.4208/nmtma.2011.42s.2); omega, ratio, W: Chandrasekhar 1939, Table 4
    (1.5, 3.65375373621912608, 2.714055, 5.990705, 0.77014),
    # xi1: Boyd 2011; omega, ratio, W: Chandrasekhar 1939, Table 4
    (3.0, 6.896848619376960375454528, 2.018235951, 54.18248, 11.05066),
]

# (n, xi1, omega_n, rho_c/rho_mean) to 6 figures: from memory (values as
# tabulated in Chandrasekhar 1939, Table 4; not re-checked against the book here)
FROM_MEMORY = [
    (2.0, 4.35287, 2.41105, 11.40254),
    (2.5, 5.35528, 2.18720, 23.40646),
    (3.5, 9.53581, 1.89056, 152.8837),
    (4.0, 14.97155, 1.79723, 622.4079),
    (4.5, 31.83646, 1.73780, 6189.47),
]


@pytest.mark.parametrize("n, xi1, omega, ratio, W", PUBLISHED)
def test_published_first_zero_mass_and_concentration(n, xi1, omega, ratio, W):
    s = le.solve(n)
    assert s.xi1 == pytest.approx(xi1, rel=1e-12)  # Boyd's xi1 is given to 18+ figures
    # Chandrasekhar's table gives 7 figures for omega and the density ratio, 5-6 for W
    assert s.omega == pytest.approx(omega, rel=2e-7)
    assert s.density_ratio == pytest.approx(ratio, rel=2e-7)
    assert s.W == pytest.approx(W, rel=1e-5)


@pytest.mark.parametrize("n, xi1, omega, ratio", FROM_MEMORY)
def test_tabulated_values_other_indices(n, xi1, omega, ratio):
    s = le.solve(n)
    assert s.xi1 == pytest.approx(xi1, rel=2e-6)
    assert s.omega == pytest.approx(omega, rel=5e-6)
    assert s.density_ratio == pytest.approx(ratio, rel=2e-6)


def test_derived_constants_are_consistent():
    s = le.solve(2.0)
    assert s.omega == pytest.approx(-s.xi1**2 * s.dtheta1, rel=1e-15)
    assert s.density_ratio == pytest.approx(s.omega / (3.0 * s.dtheta1**2 * s.xi1), rel=1e-14)
    assert s.W == pytest.approx(1.0 / (4 * math.pi * 3.0 * s.dtheta1**2), rel=1e-15)


# --- analytic solutions over the whole grid ----------------------------------

def test_n0_analytic_over_grid():
    # analytic: theta = 1 - xi^2/6, xi1 = sqrt(6), uniform density
    s = le.solve(0.0)
    xi = le.GRID * s.xi1
    assert s.xi1 == pytest.approx(math.sqrt(6.0), rel=1e-14)
    assert s.dtheta1 == pytest.approx(-math.sqrt(6.0) / 3.0, rel=1e-13)
    assert s.omega == pytest.approx(2.0 * math.sqrt(6.0), rel=1e-13)
    assert s.density_ratio == pytest.approx(1.0, rel=1e-13)
    assert s.W == pytest.approx(3.0 / (8.0 * math.pi), rel=1e-13)  # 0.1193662
    exact = 1.0 - xi**2 / 6.0
    np.testing.assert_allclose(s.theta, exact, rtol=1e-9, atol=1e-14)
    np.testing.assert_allclose(s.dtheta, -xi / 3.0, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(s.q, le.GRID**3, rtol=1e-12, atol=1e-15)


def test_n1_analytic_over_grid():
    # analytic: theta = sin(xi)/xi, xi1 = pi, theta'(pi) = -1/pi
    s = le.solve(1.0)
    xi = le.GRID * s.xi1
    assert s.xi1 == pytest.approx(math.pi, rel=1e-13)
    assert s.omega == pytest.approx(math.pi, rel=1e-12)
    assert s.density_ratio == pytest.approx(math.pi**2 / 3.0, rel=1e-12)
    assert s.W == pytest.approx(math.pi / 8.0, rel=1e-12)
    with np.errstate(invalid="ignore", divide="ignore"):
        exact = np.where(xi > 0, np.sin(xi) / xi, 1.0)
        q_exact = (np.sin(xi) - xi * np.cos(xi)) / math.pi
    np.testing.assert_allclose(s.theta, exact, rtol=1e-12, atol=1e-13)
    # relative accuracy down to the last point, where theta ~ 1e-6
    assert rel(s.theta, exact).max() < 1e-7
    np.testing.assert_allclose(s.q, q_exact, rtol=1e-10, atol=1e-14)


def test_gravitational_energy_coefficient_from_profile():
    # analytic: Omega = -3/(5-n) G M^2 / R (Chandrasekhar 1939, ch. IV), checked by
    # integrating -G m dm / r over the solution: coefficient = int_0^1 (q/s) (dq/ds) ds
    # with dq/ds = 3 s^2 (rho_c/rho_mean) theta^n.
    for n in (0.0, 1.5, 3.0, 4.0):
        s = le.solve(n)
        x = le.GRID
        integrand = 3.0 * x * s.q * s.density_ratio * s.theta**n
        coeff = np.trapezoid(integrand, x)
        assert coeff == pytest.approx(s.grav_coeff, rel=2e-4)
        assert s.grav_coeff == 3.0 / (5.0 - n)


# --- grid and caching --------------------------------------------------------

def test_grid_shape_and_surface_resolution():
    g = le.GRID
    assert g.size == 256 and g[0] == 0.0
    assert g[-1] == pytest.approx(1.0 - 1e-6, abs=1e-15)
    assert np.all(np.diff(g) > 0)
    depth = 1.0 - g
    # at least ten points per decade of depth between 1e-2 and 1e-6
    for d in range(2, 6):
        assert np.sum((depth < 10.0**-d) & (depth >= 10.0 ** -(d + 1))) >= 10
    assert not g.flags.writeable


def test_solution_profile_is_physical():
    for n in (0.0, 0.7, 1.5, 3.0, 4.8):
        s = le.solve(n)
        assert np.all(s.theta > 0) and np.all(np.diff(s.theta) < 0)
        assert np.all(np.diff(s.q) >= 0) and s.q[0] == 0.0 and s.q[1] > 0.0
        assert 1.0 - 3.1e-6 < s.q[-1] <= 1.0  # n = 0 leaves 3e-6 of the mass outside s = 1 - 1e-6


def test_solve_is_cached_per_index():
    assert le.solve(3) is le.solve(3.0)
    assert le.solve(np.float64(2.5)) is le.solve(2.5)
    with pytest.raises(ValueError):
        le.solve(2.0).theta[3] = 0.0  # cached arrays are read-only


# --- index table ------------------------------------------------------------

def test_tables_all_equal_uses_exact_solution():
    theta, q, xi1, ratio, W, gc = le.tables(np.full(4, 3.0))
    s = le.solve(3.0)
    assert theta.shape == (4, le.GRID.size) and q.shape == (4, le.GRID.size)
    np.testing.assert_array_equal(theta[2], s.theta)
    np.testing.assert_array_equal(xi1, s.xi1)
    np.testing.assert_array_equal(W, s.W)
    np.testing.assert_array_equal(gc, 1.5)


@pytest.mark.parametrize("n", [0.02, 0.37, 1.5, 2.37, 3.83, 4.52, 4.93, 4.985])
def test_tables_interpolation_accuracy(n):
    # Measured worst errors: ~1e-7 for 1 <= n <= 4, ~1e-6 near n = 0, 5e-6 above 4.
    theta, q, xi1, ratio, W, gc = le.tables(np.array([n, 1.0]))
    s = le.solve(n)
    assert rel(xi1[0], s.xi1) < 1e-6
    assert rel(ratio[0], s.density_ratio) < 1e-5
    assert rel(W[0], s.W) < 1e-5
    assert gc[0] == pytest.approx(3.0 / (5.0 - n), rel=1e-15)
    bulk = le.GRID < 0.95
    assert rel(theta[0, bulk], s.theta[bulk]).max() < 1e-5
    assert rel(theta[0], s.theta).max() < 1e-5  # also at the surface points
    assert rel(q[0, 1:], s.q[1:]).max() < 1e-5
    assert q[0, 0] == 0.0 and theta[0, 0] == pytest.approx(1.0, abs=1e-15)


def test_tables_mid_range_is_tighter():
    n = np.array([1.13, 2.37, 3.83])
    theta, q, xi1, ratio, W, _ = le.tables(n)
    for i, v in enumerate(n):
        s = le.solve(v)
        assert rel(theta[i], s.theta).max() < 3e-7
        assert rel(xi1[i], s.xi1) < 1e-8
        assert rel(W[i], s.W) < 1e-8


def test_tables_above_top_solved_exactly():
    n = np.array([2.0, 4.995, 4.995, 4.9999])
    theta, q, xi1, ratio, W, _ = le.tables(n)
    for i in (1, 2, 3):
        s = le.solve(n[i])
        np.testing.assert_array_equal(theta[i], s.theta)
        assert xi1[i] == s.xi1 and W[i] == s.W and ratio[i] == s.density_ratio
    assert xi1[3] > 1e5  # the first zero moves out without bound as n -> 5


def test_tables_accepts_scalar():
    theta, q, xi1, *_ = le.tables(1.5)
    assert theta.shape == (1, le.GRID.size) and xi1.shape == (1,)


# --- bad input --------------------------------------------------------------

@pytest.mark.parametrize("bad", [5.0, 5.5, -0.1, float("nan"), float("inf")])
def test_solve_rejects_bad_index(bad):
    with pytest.raises(ConfigError) as info:
        le.solve(bad)
    msg = str(info.value)
    assert str(bad) in msg and "0 <= n < 5" in msg


def test_solve_rejects_non_number():
    with pytest.raises(ConfigError, match="must be a number"):
        le.solve("three")


@pytest.mark.parametrize("bad", [5.0, -0.1, float("nan")])
def test_tables_rejects_bad_index(bad):
    with pytest.raises(ConfigError, match=r"0 <= n < 5"):
        le.tables(np.array([3.0, bad, 2.0]))
