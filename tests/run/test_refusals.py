"""Inputs that were accepted and then failed every star (or gave silently wrong results) are refused up front,
or noticed."""

import math
import os

import pytest

from radwalk.cli.main import main
from radwalk.errors import CatalogError, ConfigError
from radwalk.host.config import SamplerConfig, from_dict
from radwalk.host.params import Prior
from radwalk.run.catalog import read_catalog

HEADER = "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"


def test_one_column_for_two_observables_is_refused(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("name,R,R_err,L,L_err\na,1.0,0.05,1.0,0.05\n")
    with pytest.raises(CatalogError, match="column 'R' is mapped to both"):
        read_catalog(path, {"id": "name", "radius": "R", "radius_err": "R_err", "luminosity": "R",
                            "luminosity_err": "L_err"})


@pytest.mark.parametrize("value", [math.nan, -0.01, math.inf])
def test_nan_or_negative_solar_reference_is_refused(value):
    with pytest.raises(ConfigError, match=r"\[metallicity\] solar_z"):
        from_dict({"metallicity": {"solar_z": value}})


def test_infinite_tau_multiple_and_absurd_walkers_are_refused():
    with pytest.raises(ConfigError, match="tau_multiple"):
        SamplerConfig(tau_multiple=math.inf)
    with pytest.raises(ConfigError, match="walkers"):
        SamplerConfig(walkers=100_000_000_000)


def test_prior_a_few_ulp_wide_is_refused():
    with pytest.raises(ConfigError, match="narrow"):
        Prior("uniform", 1.0, math.nextafter(1.0, 2.0))
    Prior("uniform", 1.0, 1.0 + 1e-6)  # narrow but sampleable


def test_fit_feh_nan_is_refused_like_the_catalog_does(tmp_path, capsys):
    # Before: --feh nan 0.1 silently dropped [Fe/H] while a catalog row with it failed.
    assert main(["fit", "--radius", "1", "0.05", "--luminosity", "1", "0.05", "--feh", "nan", "0.1",
                 "--out", str(tmp_path / "f")]) == 2
    assert "[Fe/H]" in capsys.readouterr().err
    path = tmp_path / "c.csv"
    path.write_text("id,radius,radius_err,luminosity,luminosity_err,feh,feh_err\na,1.0,0.05,1.0,0.05,nan,0.1\n")
    assert read_catalog(path).stars[0].star is None


def test_truncated_csv_row_fails_with_its_reason(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text(HEADER + "a,1.0,0.05,1.0,0.05,5772,100\nb,1.1,0.05,1.2,0.05\n")
    cat = read_catalog(path)
    assert cat.stars[0].star is not None
    assert cat.stars[1].star is None and "5 of 7 fields" in cat.stars[1].error


def test_utf8_byte_order_mark_is_read(tmp_path):
    path = tmp_path / "c.csv"
    path.write_bytes(b"\xef\xbb\xbf" + (HEADER + "a,1.0,0.05,1.0,0.05,5772,100\n").encode())
    cat = read_catalog(path)
    assert [e.id for e in cat] == ["a"] and cat.stars[0].star is not None


def test_workers_are_capped_at_the_cores_and_the_stars():
    from radwalk.run.orchestrate import capped_workers

    cores = os.cpu_count() or 1
    n, note = capped_workers(1000, 50)
    assert n == min(cores, 50) and "1000" in note
    assert capped_workers(1, 50) == (1, "")
    assert capped_workers(cores, 1)[0] == 1


def test_model_luminosity_above_eddington_warns():
    from radwalk.api import one_star

    # L_Edd = 4 pi c G M / kappa_es = 3.2e4 L_sun (M / M_sun) for kappa_es = 0.2 (1 + X) cm^2/g, X = 0.7
    # (Kippenhahn, Weigert & Weiss 2012, eq. 22.10)
    star = one_star(1.0, stages={"profile": "polytrope", "relation": "homology"}, radius=1.0, luminosity=1e6)
    assert any("Eddington" in w for w in star.warnings)
    calm = one_star(1.0, stages={"profile": "polytrope", "relation": "homology"}, radius=1.0, luminosity=1.0)
    assert not any("Eddington" in w for w in calm.warnings)
