"""The quantity catalogue: one entry for every quantity the model computes, consistent units and labels."""

import astropy.units as u
import numpy as np
import pytest
from matplotlib.mathtext import MathTextParser

from radwalk.forward import quantities as q
from radwalk.forward.one_star import SUMMARY_ROWS, model_star, summary_key
from radwalk.host.config import RunConfig
from radwalk.inference.fit import stages_for
from radwalk.results.document import OBSERVED_UNITS

# astropy spells the solar units its own way; the catalogue keeps the spelling users read
ASTROPY = {"R_sun": u.R_sun, "L_sun": u.L_sun, "M_sun": u.M_sun}


# The quick textbook stages: the quantities of a structure at a given R and L (the default track grid sets its own).
TEXTBOOK = {"profile": "polytrope", "relation": "homology"}


def unit(text):
    return ASTROPY.get(text) or u.Unit(text)


@pytest.fixture(scope="module")
def sun_transport():
    stages = stages_for(RunConfig(stages=TEXTBOOK))
    values = stages.defaults()
    values.update(mass=np.array([1.0]), X=np.array([0.70]), Z=np.array([0.02]))
    pred = stages.predict(values, use_grid=False)
    _, tr = stages.structure(values, pred["radius"], pred["luminosity"])
    return tr


def test_every_transport_scalar_has_one_entry(sun_transport):
    computed = set(sun_transport.scalars)
    described = {n for n, x in q.CATALOGUE.items() if x.group not in (q.PARAMETERS,)}
    # radius, luminosity, teff and mu come from the relation and the composition, the main-sequence lifetime
    # from a model with a track (the track-grid profile), the rest from transport
    assert computed == described - {"radius", "luminosity", "teff", "mu", "main_sequence_lifetime"}


def test_every_derived_quantity_sits_in_one_report_group():
    grouped = [n for _, names in q.DERIVED_GROUPS for n in names]
    assert len(grouped) == len(set(grouped))
    assert set(grouped) == {n for n, x in q.CATALOGUE.items() if x.group != q.PARAMETERS}


def test_units_parse_and_scale_is_the_unit_conversion():
    for name, x in q.CATALOGUE.items():
        if not x.unit:
            assert x.output_unit == "" and x.scale == 1.0, name
            continue
        # IAU 2015 Resolution B3 nominal R_sun and L_sun on both sides (radwalk.constants and astropy)
        assert (1.0 * unit(x.output_unit)).to_value(unit(x.unit)) == pytest.approx(x.scale, rel=1e-12), name
        assert x.factor * x.scale == pytest.approx(1.0, rel=1e-15)


def test_observed_block_of_summary_json_uses_the_catalogue_units():
    for name, text in OBSERVED_UNITS.items():
        assert q.output_unit(name) == text


def test_labels_are_valid_mathtext():
    parser = MathTextParser("agg")
    for name in q.CATALOGUE:
        for text in (q.latex_symbol(name), q.latex_label(name)):
            parser.parse(text, dpi=72)  # raises on broken mathtext


def test_label_forms():
    assert q.latex_label("radius") == r"$R\,[R_\odot]$"
    assert q.latex_label("mu") == r"$\mu$"
    assert q.latex_label("central_density") == r"$\rho_c$$\,[\mathrm{g/cm3}]$"
    assert q.latex_label("photosphere_radius") == r"$r_{\tau=2/3}$$\,[\mathrm{R_sun}]$"
    q.register_plugin_quantity("test_only_flux", "erg / s")
    assert q.output_unit("test_only_flux") == "erg / s"
    assert q.latex_label("test_only_flux") == r"test only flux$\,[\mathrm{erg/s}]$"
    assert q.description("test_only_flux") == "test only flux"
    with pytest.raises(KeyError):
        q.output_unit("no_such_quantity")


def test_plain_units():
    assert q.plain_unit("g / cm3") == "g/cm^3"
    assert q.plain_unit("dyn / cm2") == "dyn/cm^2"
    assert q.plain_unit("R_sun") == "R_sun"
    assert q.plain_unit("") == ""


def test_model_summary_keys_are_the_documented_ones():
    # the keys `radwalk model --json` writes (README, tests/cli/test_cli_model.py); the radiative-layers-only
    # diffusion time gave way to the radiative-zone one and the convection keys when the solved star came;
    # the main-sequence lifetime came with the track grid (null for models without a track)
    assert [summary_key(n) for n in SUMMARY_ROWS] == [
        "mass_msun", "radius_rsun", "luminosity_lsun", "teff_k", "age_gyr", "mu", "central_density_g_cm3",
        "central_temperature_k", "central_pressure_dyn_cm2", "central_hydrogen", "mean_free_path_center_cm",
        "photosphere_radius_rsun",
        "diffusion_time_yr", "diffusion_time_radiative_core_yr", "diffusion_time_uniform_yr",
        "convective_crossing_time_yr", "energy_transport_time_yr", "kelvin_helmholtz_time_yr",
        "dynamical_time_s", "main_sequence_lifetime_gyr", "eddington_luminosity_lsun", "eddington_ratio",
        "convective_core_mass_fraction",
        "convective_envelope_base_radius", "convective_turnover_time_d", "convective_turnover_time_global_d"]
    stages = stages_for(RunConfig(stages=TEXTBOOK))
    summary = model_star(stages, 1.0, 0.70, 0.02, radius=1.0, luminosity=1.0).summary
    assert list(summary)[:8] == ["mass_msun", "radius_rsun", "luminosity_lsun", "teff_k", "X", "Z", "age_gyr", "mu"]
    assert summary["radius_rsun"] == 1.0 and summary["luminosity_lsun"] == 1.0
