"""Tests of the bent-power example law: radwalk's opacity contract, the formula at a few points, shapes.

Run from examples/opacity_plugin with ``python -m pytest`` (radwalk must be
installed in the same environment).
"""

import warnings

import numpy as np
import pytest
import radwalk_bent_power
from radwalk_bent_power import BentPower, radwalk_opacities

from radwalk.host.contracts import contract_cases

LAW = BentPower()


# radwalk's whole contract for an opacity law, one test per check: test_contract[opacity:bent-power:finite], ...
@pytest.mark.parametrize("case", contract_cases(radwalk_bent_power), ids=str)
def test_contract(case):
    case.run()
DEFAULTS = {p.name: p.default for p in LAW.params}


def test_the_hook_returns_the_law():
    (law,) = radwalk_opacities()
    assert isinstance(law, BentPower) and law.name == "bent-power"
    assert [p.name for p in law.params] == ["kappa_bend", "T_bend", "rho_slope", "cool_slope", "hot_slope"]
    assert all(p.lower <= p.default <= p.upper for p in law.params)


@pytest.mark.parametrize("rho, T, X, kappa", [
    (1.0, 2e6, 0.0, 20.0),  # at the bend and 1 g/cm^3 the law is kappa_bend (1 + X)
    (4.0, 2e6, 0.7, 68.0),  # 20 * 1.7 * 4^0.5
    (1.0, 4e6, 0.0, 4.419417382),  # 20 * 2^-3.5 * ((1 + 2^2) / 2)^((3.5 - 1.5) / 2)
    (1.0, 1e6, 0.0, 141.4213562),  # 20 * 2^3.5 * ((1 + 0.5^2) / 2)^1 = 100 sqrt(2)
])
def test_formula_at_points(rho, T, X, kappa):
    assert LAW.kappa(rho, T, X, 0.02) == pytest.approx(kappa, rel=1e-9)


def test_parameters_enter_as_written():
    # kappa_bend scales the law; rho_slope = 1 makes it linear in rho; equal slopes remove the bend
    base = LAW.kappa(3.0, 5e5, 0.7, 0.02)
    assert LAW.kappa(3.0, 5e5, 0.7, 0.02, kappa_bend=40.0) == pytest.approx(2 * base, rel=1e-12)
    assert LAW.kappa(3.0, 2e6, 0.0, 0.02, rho_slope=1.0) == pytest.approx(60.0, rel=1e-12)
    flat = LAW.kappa(1.0, 8e6, 0.0, 0.02, cool_slope=2.0, hot_slope=2.0)
    assert flat == pytest.approx(20.0 * 4.0**-2, rel=1e-12)


def test_slopes_far_from_the_bend():
    def slope(T):
        return np.log(LAW.kappa(1.0, T * 1.001, 0.7, 0.02) / LAW.kappa(1.0, T, 0.7, 0.02)) / np.log(1.001)

    assert slope(1e4) == pytest.approx(-DEFAULTS["cool_slope"], abs=1e-3)
    assert slope(1e8) == pytest.approx(-DEFAULTS["hot_slope"], abs=2e-3)


def test_shapes_and_broadcasting():
    n, g = 3, 50
    rho = np.geomspace(1e-8, 1e2, n * g).reshape(n, g)
    T = np.geomspace(1e4, 1e8, n * g).reshape(n, g)
    X = np.array([[0.6], [0.7], [0.75]])
    Z = np.array([[0.01], [0.02], [0.03]])
    params = {name: np.full((n, 1), value) for name, value in DEFAULTS.items()}
    full = LAW.kappa(rho, T, X, Z, **params)
    assert full.shape == (n, g)
    for i in range(n):  # one sample at a time, scalars for the per-sample values
        row = LAW.kappa(rho[i], T[i], float(X[i, 0]), float(Z[i, 0]))
        assert row.shape == (g,) and np.allclose(row, full[i], rtol=1e-13, atol=0)
    assert np.ndim(LAW.kappa(1.0, 1e6, 0.7, 0.02)) == 0
    # Z is not used, but it still broadcasts into the result
    assert LAW.kappa(1.0, 1e6, 0.7, np.zeros((4, 1))).shape == (4, 1)


def test_finite_and_positive_over_the_validity_range():
    (rlo, rhi), (tlo, thi) = LAW.validity.rho, LAW.validity.T
    rho, T = np.meshgrid(np.geomspace(rlo, rhi, 131), np.geomspace(tlo, thi, 81), indexing="ij")
    for X in (0.0, 0.7, 1.0):
        k = LAW.kappa(rho, T, X, 0.02)
        assert np.all(np.isfinite(k)) and np.all(k > 0)


def test_surface_points_give_no_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        k = LAW.kappa(np.array([0.0, 1e-12]), np.array([0.0, 10.0]), 0.7, 0.02)
    assert np.all(np.isfinite(k)) and np.all(k >= 0)
