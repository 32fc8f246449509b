"""Tests of the validity-range checks (pipeline/validity.py)."""

import warnings

import numpy as np
import pytest

from radwalk.errors import ModelError, ValidityWarning
from radwalk.host.params import Validity
from radwalk.host.validity import fraction_outside, outside_validity, warn_outside
from radwalk.plugins.opacity import HMinus, Kramers

RANGE = Validity(T=(1e4, 1e8), rho=(1e-10, 1e3), Z=(0.0, 0.1), note="test law")


class _Law:
    name = "test-law"
    validity = RANGE


def test_all_inside_gives_none_and_no_warning():
    T = np.logspace(4.5, 7.5, 10)
    rho = np.logspace(-8, 2, 10)
    assert outside_validity(RANGE, rho, T, 0.7, 0.02) is None
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert warn_outside(_Law(), rho, T, 0.7, 0.02) is None


def test_closed_intervals_include_their_ends():
    assert outside_validity(RANGE, np.array([1e-10, 1e3]), np.array([1e4, 1e8]), 0.7, 0.1) is None


def test_fraction_of_points_and_message():
    T = np.array([5e3, 1e5, 1e6, 1e9])  # one below, one above
    frac, exc = fraction_outside(RANGE, 1.0, T, 0.7, 0.02)
    assert frac == pytest.approx(0.5)
    assert [e.axis for e in exc] == ["T"]
    assert exc[0].below == pytest.approx(0.25) and exc[0].above == pytest.approx(0.25)
    msg = outside_validity(_Law(), 1.0, T, 0.7, 0.02)
    assert msg.startswith("test-law used outside its validity range: 50% of points")
    assert "25% below 10000 K" in msg and "25% above 1e+08 K" in msg
    assert "\n" not in msg


def test_points_outside_on_two_axes_count_once():
    T = np.array([5e3, 1e5, 1e5, 1e5])
    rho = np.array([1e4, 1.0, 1.0, 1e4])
    frac, exc = fraction_outside(RANGE, rho, T, 0.7, 0.02)
    assert frac == pytest.approx(0.5)
    assert {e.axis: e.outside for e in exc} == {"T": pytest.approx(0.25), "rho": pytest.approx(0.5)}


def test_weights_give_fraction_of_mass():
    T = np.array([5e3, 1e5, 1e6])
    dm = np.array([1.0, 2.0, 7.0])
    assert fraction_outside(RANGE, 1.0, T, 0.7, 0.02, weights=dm)[0] == pytest.approx(0.1)
    msg = outside_validity(_Law(), 1.0, T, 0.7, 0.02, weights=dm)
    assert "10% of the mass" in msg


def test_broadcast_per_sample_composition():
    # rho, T [n, g] with Z [n, 1]: the second star's metallicity is out of range.
    T = np.full((2, 3), 1e6)
    Z = np.array([[0.02], [0.2]])
    frac, exc = fraction_outside(RANGE, 1.0, T, 0.7, Z)
    assert frac == pytest.approx(0.5) and exc[0].axis == "Z" and exc[0].above == pytest.approx(0.5)


def test_unlimited_and_missing_axes_are_skipped():
    assert outside_validity(Validity(T=(1e4, 1e5)), rho=1e9, T=2e4, X=5.0, Z=-1.0) is None
    assert outside_validity(RANGE, T=None, rho=None) is None
    masses = Validity(mass=(0.5, 2.0))
    assert "mass: 50% above 2 M_sun" in outside_validity(masses, mass=np.array([1.0, 3.0]), name="relation")


def test_nan_counts_as_outside():
    msg = outside_validity(RANGE, 1.0, np.array([1e5, np.nan]), 0.7, 0.02)
    assert "50% of points" in msg and "not a number" in msg


def test_bad_weights_raise():
    with pytest.raises(ModelError):
        fraction_outside(RANGE, 1.0, np.array([1e5, 1e3]), 0.7, 0.02, weights=np.array([0.0, 0.0]))
    with pytest.raises(ModelError):
        fraction_outside(RANGE, 1.0, np.array([1e5, 1e3]), 0.7, 0.02, weights=np.array([1.0, -1.0]))
    with pytest.raises(ModelError):
        outside_validity(object(), 1.0, 1e5, 0.7, 0.02)


def test_warn_outside_respects_threshold():
    T = np.array([5e3, 1e5, 1e6, 1e7])  # 25% outside
    with pytest.warns(ValidityWarning, match="kramers used outside its validity range: 25% of points"):
        msg = warn_outside(Kramers(), 1.0, T, 0.7, 0.02)
    assert "kramers" in msg
    with pytest.warns(ValidityWarning):
        warn_outside(Kramers(), 1.0, T, 0.7, 0.02, threshold=0.2)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert warn_outside(Kramers(), 1.0, T, 0.7, 0.02, threshold=0.25) is None
        assert warn_outside(Kramers(), 1.0, T, 0.7, 0.02, threshold=0.5) is None


def test_h_minus_in_the_solar_interior_warns():
    # H-minus is stated for 3000-6000 K and 1e-10-1e-5 g/cm^3 (Carroll & Ostlie 1996, eq. 9.28).
    with pytest.warns(ValidityWarning, match="h-minus") as rec:
        warn_outside(HMinus(), rho=np.array([1e-7, 150.0]), T=np.array([5000.0, 1.5e7]), X=0.35, Z=0.02)
    assert "T: 50% above 6000 K" in str(rec[0].message)
    assert "rho: 50% above 1e-05 g/cm^3" in str(rec[0].message)
