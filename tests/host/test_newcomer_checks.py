"""The checker catches what a newcomer's first opacity law gets wrong: each mistake as a real plugin, checked for real.

Units (m^2/kg instead of cm^2/g), a parameter used but not declared, a hook that returns a component instead of
a list, and a law positive inside its stated range but negative in a star's cool outer layers.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.errors import ModelError, PluginError
from radwalk.forward.stages import StageSet
from radwalk.host.contracts import check_target
from radwalk.host.contracts.opacity import FLOOR_FRACTION, degenerate_density, electron_scattering_floor
from radwalk.host.registry import Registry

HEADER = """\
import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity
"""

# Kramers bound-free plus electron scattering, as a newcomer writes it from a textbook.
LAW = HEADER + """

class Law:
    name = "{name}"
    description = "Kramers plus electron scattering"
    params = (Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity"),)
    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))

    def kappa({signature}):
        {body}


@hookimpl
def radwalk_opacities():
    return {returned}
"""
CM2_PER_G = "scale * (0.2 * (1 + X) + 4e25 * Z * (1 + X) * rho * T**-3.5)"


def write(tmp_path, name="first-law", signature="self, rho, T, X, Z, scale=1.0", body=f"return {CM2_PER_G}",
          returned="[Law()]"):
    path = tmp_path / f"{name.replace('-', '_')}.py"
    path.write_text(LAW.format(name=name, signature=signature, body=body, returned=returned))
    return str(path)


def report_of(path):
    (report,) = check_target(path, entry_points=False)
    return report


def test_the_textbook_law_in_cgs_passes(tmp_path):
    report = report_of(write(tmp_path))
    assert report.passed, report.format_table()
    assert "electron-scattering floor" in report.row("units").detail
    assert "centre to photosphere" in report.row("star").detail


def test_floor_is_thomson_scattering_of_an_ionised_gas():
    # 0.2 (1 + X) cm^2/g: Kippenhahn, Weigert & Weiss, Stellar Structure and Evolution, eq. 17.2 (0.20 there)
    assert electron_scattering_floor(0.0) == pytest.approx(0.2, rel=0.01)
    assert electron_scattering_floor(0.7) == pytest.approx(0.34, rel=0.01)
    # Degeneracy onset: the Sun's centre (150 g/cm^3, 1.57e7 K; standard solar model, from memory) lies below
    # it, white-dwarf matter (1e6 g/cm^3 at 1e7 K, common practice, no source) far above it.
    assert 150.0 < degenerate_density(1.57e7, 0.35) < 1e6


def test_opacity_in_m2_per_kg_fails_the_units_check(tmp_path):
    # the same law in SI: 1 m^2/kg = 10 cm^2/g, so every value is 10 times too low
    report = report_of(write(tmp_path, name="si-law", body=f"return 0.1 * ({CM2_PER_G})"))
    row = report.row("units")
    assert not row.passed
    assert "check the units" in row.detail and "cm^2/g" in row.detail
    ratio = float(re.search(r"is ([0-9.]+) x the electron-scattering floor", row.detail).group(1))
    assert ratio == pytest.approx(0.1, rel=0.01) and ratio < FLOOR_FRACTION
    assert re.search(r"rho=[0-9.e+-]+ g/cm\^3, T=[0-9.e+-]+ K", row.detail)
    # every other check passes: only the units give it away
    assert [r.check for r in report.failed()] == ["units"]


def test_absorption_without_scattering_is_not_taken_for_a_unit_mistake(tmp_path):
    # Kramers alone falls as T^-3.5 far below the floor at high T: a missing term, reported but not failed
    body = "return scale * 4e25 * Z * (1 + X) * rho * T**-3.5 + 1e-30"
    row = report_of(write(tmp_path, name="kramers-alone", body=body)).row("units")
    assert row.passed and row.detail.startswith("not judged: ")
    assert "runs as T^-3.5 rho^1: absorption without electron scattering" in row.detail


def test_keyword_used_by_kappa_but_not_declared(tmp_path):
    signature = "self, rho, T, X, Z, scale=1.0, kappa_0=4e25"
    body = "return scale * (0.2 * (1 + X) + kappa_0 * Z * (1 + X) * rho * T**-3.5)"
    report = report_of(write(tmp_path, name="hidden-param", signature=signature, body=body))
    row = report.row("signature")
    assert not row.passed
    assert "kappa() takes kappa_0=4e+25, but no Param declares 'kappa_0'" in row.detail
    assert "always stays 4e+25" in row.detail


def test_name_read_from_params_but_not_declared(tmp_path):
    body = ('return params["scale"] * (0.2 * (1 + X) + params.get("kappa_0", 4e25) * Z * (1 + X) * rho '
            '* T**-3.5)')
    report = report_of(write(tmp_path, name="read-param", signature="self, rho, T, X, Z, **params", body=body))
    row = report.row("signature")
    assert not row.passed and "reads params['kappa_0'], but no Param declares 'kappa_0'" in row.detail


def test_declared_parameter_kappa_does_not_take(tmp_path):
    body = "return 0.2 * (1 + X) + 4e25 * Z * (1 + X) * rho * T**-3.5"
    report = report_of(write(tmp_path, name="no-scale", signature="self, rho, T, X, Z", body=body))
    row = report.row("signature")
    assert not row.passed and "Param 'scale' is declared but kappa() does not take it" in row.detail


@pytest.mark.parametrize("returned, words", [
    ("Law()", "returned a Law object ('lonely'), not a list of components; return a list, e.g. [Law()]"),
    ("Law", "returned the class Law, not a list of components; return a list, e.g. [Law()]"),
    ("[Law]", "returned the class Law in its list, not an instance; return [Law()]"),
])
def test_hook_returning_a_component_instead_of_a_list(tmp_path, returned, words):
    path = write(tmp_path, name="lonely", returned=returned)
    with pytest.raises(PluginError) as info:
        Registry(plugin_files=[path], entry_points=False)
    assert str(info.value) == f"file {path}: hook radwalk_opacities {words}"
    report = report_of(path)
    assert [(r.check, r.passed) for r in report.rows] == [("load", False)]
    assert "hook radwalk_opacities" in report.rows[0].detail and path in report.rows[0].detail


# Positive from 1e4 K up (its stated range) but negative below 8000 K, where cool stars' envelopes reach.
NEGATIVE_WHEN_COOL = f"return np.where(T < 8e3, -1.0, 1.0) * ({CM2_PER_G})"


def test_law_negative_in_outer_layers_fails_the_star_check(tmp_path):
    report = report_of(write(tmp_path, name="cool-trouble", body=NEGATIVE_WHEN_COOL))
    # inside its own range it is fine
    for check in ("finite", "positive", "smoothness", "units"):
        assert report.row(check).passed, report.format_table()
    row = report.row("star")
    assert not row.passed
    match = re.search(r"kappa=(-[0-9.e+-]+) cm\^2/g at rho=([0-9.e+-]+) g/cm\^3, T=([0-9.e+-]+) K, "
                      r"r/R=([0-9.]+) in the ([0-9.]+) M_sun star", row.detail)
    assert match, row.detail
    assert float(match.group(3)) < 8e3 and 0.5 < float(match.group(4)) <= 1.0
    assert "outside the law's stated range" in row.detail
    assert "np.float64" not in row.detail and "grid point" not in row.detail


def test_fit_refusal_names_rho_t_and_r_over_r(tmp_path):
    """Where a fit meets such a law (the star's structure), its error names the layer, not a numpy repr."""
    path = write(tmp_path, name="cool-trouble-fit", body=NEGATIVE_WHEN_COOL)
    reg = Registry(plugin_files=[path], entry_points=False)
    stages = StageSet.build(reg, {"opacity": "cool-trouble-fit", "profile": "polytrope", "relation": "homology"})
    values = stages.defaults()
    values.update(mass=np.array([1.0]), X=np.array([0.7]), Z=np.array([0.014]))
    with pytest.raises(ModelError) as info:
        stages.structure(values, np.array([k.R_SUN]), np.array([k.L_SUN]))
    text = str(info.value)
    match = re.search(r"kappa=(-[0-9.e+-]+) cm\^2/g at rho=([0-9.e+-]+) g/cm\^3, T=([0-9.e+-]+) K, "
                      r"r/R=([0-9.]+) of a 1 M_sun star", text)
    assert match, text
    assert float(match.group(3)) < 8e3
    assert "np.float64" not in text and "grid point" not in text


def test_a_profile_failure_names_the_layer_by_r_over_r(tmp_path):
    path = tmp_path / "bad_profile.py"
    path.write_text(HEADER + """
from radwalk.host.components import Profile
from radwalk.plugins.profiles import Polytrope


class Negative(Polytrope):
    name = "negative-layer"

    def profile(self, M, R, X, Z, n=3.0):
        p = super().profile(M, R, X, Z, n=n)
        T = p.T.copy()
        T[:, 200] = -5.0  # one bad layer, in the envelope
        return Profile(r=p.r, m=p.m, rho=p.rho, P=p.P, T=T, beta=p.beta, M=p.M, R=p.R, X=p.X, Z=p.Z)


@hookimpl
def radwalk_profiles():
    return [Negative()]
""")
    row = report_of(str(path)).row("physical")
    assert not row.passed
    assert re.match(r"T < 0 at r/R=0\.9[0-9]+, rho=[0-9.e+-]+ g/cm\^3, layer 201 of [0-9]+ from the centre of ",
                    row.detail), row.detail
    assert "grid point" not in row.detail
