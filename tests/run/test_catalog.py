"""Catalog input: formats, columns, units, whole-file errors and per-row failures."""

import hashlib

import astropy.units as u
import numpy as np
import pytest
from astropy.table import MaskedColumn, Table

from radwalk import constants as k
from radwalk.errors import CatalogError
from radwalk.inference.star import Star
from radwalk.run.catalog import read_catalog

IDS = ["sun-like", "warm", "hot"]
R = [1.0, 1.4, 2.1]
R_ERR = [0.04, 0.06, 0.1]
L = [1.0, 4.0, 30.0]
L_ERR = [0.05, 0.3, 2.0]
T = [5772.0, 6900.0, 9500.0]
T_ERR = [100.0, 120.0, 250.0]


def table(radius_unit=u.R_sun, lum_unit=u.L_sun, with_units=True):
    t = Table()
    t["id"] = IDS
    rf = (1.0 * u.R_sun).to_value(radius_unit) if with_units else 1.0
    lf = (1.0 * u.L_sun).to_value(lum_unit) if with_units else 1.0
    t["radius"] = np.array(R) * rf
    t["radius_err"] = np.array(R_ERR) * rf
    t["luminosity"] = np.array(L) * lf
    t["luminosity_err"] = np.array(L_ERR) * lf
    t["teff"] = T
    t["teff_err"] = T_ERR
    if with_units:
        for c in ("radius", "radius_err"):
            t[c].unit = radius_unit
        for c in ("luminosity", "luminosity_err"):
            t[c].unit = lum_unit
        for c in ("teff", "teff_err"):
            t[c].unit = u.K
    return t


def stars_of(cat):
    return {e.id: e.star for e in cat.stars}


@pytest.mark.parametrize("ext", ["ecsv", "fits", "vot", "csv"])
def test_every_format_gives_the_same_stars(tmp_path, ext):
    ref = stars_of(read_catalog(_write(table(), tmp_path / "ref.ecsv")))
    t = table(with_units=ext != "csv")
    path = tmp_path / f"cat.{ext}"
    t.write(path, format="votable" if ext == "vot" else None)
    cat = read_catalog(path)
    assert [e.id for e in cat.stars] == IDS
    for sid, star in stars_of(cat).items():
        np.testing.assert_allclose(star.values, ref[sid].values, rtol=1e-12)
        np.testing.assert_allclose(star.errors, ref[sid].errors, rtol=1e-12)
    assert cat.fingerprint == hashlib.sha256(path.read_bytes()).hexdigest()


def _write(t, path, **kw):
    t.write(path, **kw)
    return path


def test_values_arrive_in_cgs(tmp_path):
    cat = read_catalog(_write(table(), tmp_path / "c.ecsv"))
    star = cat.stars[0].star
    assert star.values == (1.0 * k.R_SUN, 1.0 * k.L_SUN, 5772.0)
    assert cat.units == {"radius": "R_sun", "radius_err": "R_sun", "luminosity": "L_sun",
                         "luminosity_err": "L_sun", "teff": "K", "teff_err": "K"}


@pytest.mark.parametrize("runit,lunit", [(u.km, u.W), (u.m, u.erg / u.s), (u.cm, u.W)])
def test_units_from_the_file_are_converted(tmp_path, runit, lunit):
    # IAU 2015 Resolution B3 nominal R_sun = 695700 km and L_sun = 3.828e26 W (radwalk.constants).
    ref = stars_of(read_catalog(_write(table(), tmp_path / "ref.ecsv")))
    cat = read_catalog(_write(table(runit, lunit), tmp_path / "other.ecsv"))
    assert cat.notices == []
    for sid, star in stars_of(cat).items():
        np.testing.assert_allclose(star.values, ref[sid].values, rtol=1e-12)
        np.testing.assert_allclose(star.errors, ref[sid].errors, rtol=1e-12)


def test_km_column_is_the_nominal_solar_radius(tmp_path):
    t = table(u.km, u.W)
    assert t["radius"][0] == pytest.approx(695700.0)  # IAU 2015 B3: R_sun = 695700 km
    assert t["luminosity"][0] == pytest.approx(3.828e26)  # IAU 2015 B3: L_sun = 3.828e26 W
    cat = read_catalog(_write(t, tmp_path / "km.ecsv"))
    assert cat.stars[0].star.user_values()["radius"][0] == pytest.approx(1.0, rel=1e-14)


def test_columns_without_units_get_defaults_and_one_notice_each(tmp_path):
    t = table(with_units=False)
    t["radius_err"].unit = u.R_sun  # this one has a unit: no notice for it
    cat = read_catalog(_write(t, tmp_path / "c.ecsv"))
    assert cat.notices == [
        "radius has no unit in the file; read as R_sun",
        "luminosity has no unit in the file; read as L_sun",
        "luminosity_err has no unit in the file; read as L_sun, the unit of luminosity",
        "teff has no unit in the file; read as K",
        "teff_err has no unit in the file; read as K, the unit of teff",
    ]
    assert cat.stars[1].star.values[0] == pytest.approx(1.4 * k.R_SUN)


def test_error_without_unit_takes_the_unit_of_its_value(tmp_path):
    t = table(u.km, u.L_sun)
    t["radius_err"].unit = None
    cat = read_catalog(_write(t, tmp_path / "c.ecsv"))
    assert cat.notices == ["radius_err has no unit in the file; read as km, the unit of radius"]
    assert cat.stars[0].star.errors[0] == pytest.approx(0.04 * k.R_SUN, rel=1e-12)


def test_unit_of_the_wrong_kind_is_refused(tmp_path):
    t = table()
    t["radius"].unit = u.K
    with pytest.raises(CatalogError, match=r"column 'radius' of c.ecsv has unit K, which is not a length"):
        read_catalog(_write(t, tmp_path / "c.ecsv"))


def test_missing_column_lists_missing_and_available(tmp_path):
    t = table()
    t.remove_columns(["radius_err", "teff_err"])
    t.rename_column("id", "name")
    with pytest.raises(CatalogError) as err:
        read_catalog(_write(t, tmp_path / "c.ecsv"))
    msg = str(err.value)
    assert "lacks required column(s): id, radius_err, teff_err" in msg
    assert "columns in the file: name, radius, luminosity, luminosity_err, teff" in msg
    assert "[columns]" in msg and "\n" not in msg


def test_no_observable_at_all(tmp_path):
    t = Table({"id": ["a"], "mass": [1.0]})
    with pytest.raises(CatalogError, match=r"at least one of radius \+ radius_err"):
        read_catalog(_write(t, tmp_path / "c.ecsv"))


def test_column_map_and_case(tmp_path):
    t = table()
    t.rename_column("id", "name")
    t.rename_column("teff", "Teff")
    t.rename_column("radius_err", "e_R")
    cat = read_catalog(_write(t, tmp_path / "c.ecsv"), columns={"id": "name", "radius_err": "e_R"})
    assert cat.columns["id"] == "name" and cat.columns["teff"] == "Teff"
    assert cat.notices == ["column 'Teff' read as teff"]
    assert [e.id for e in cat.stars] == IDS
    with pytest.raises(CatalogError, match=r"lacks required column\(s\): star \(for id\)"):
        read_catalog(tmp_path / "c.ecsv", columns={"id": "star", "radius_err": "e_R"})


def test_only_some_observables(tmp_path):
    t = table()
    t.remove_columns(["teff", "teff_err"])
    star = read_catalog(_write(t, tmp_path / "c.ecsv")).stars[0].star
    assert np.isnan(star.values[2]) and star.values[0] == k.R_SUN


def test_unreadable_files(tmp_path):
    with pytest.raises(CatalogError, match="does not exist"):
        read_catalog(tmp_path / "nope.ecsv")
    with pytest.raises(CatalogError, match="is a folder"):
        read_catalog(tmp_path)
    junk = tmp_path / "junk.fits"
    junk.write_bytes(b"\x00\x01 this is not FITS " * 50)
    with pytest.raises(CatalogError, match=r"cannot read catalog .*junk.fits as fits"):
        read_catalog(junk)
    odd = tmp_path / "stars.dat"
    odd.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(CatalogError, match="cannot read catalog"):
        read_catalog(odd)


def test_empty_files(tmp_path):
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    with pytest.raises(CatalogError, match="is empty"):
        read_catalog(empty)
    header = tmp_path / "header.csv"
    header.write_text("id,radius,radius_err\n")
    with pytest.raises(CatalogError, match="has no rows"):
        read_catalog(header)


def test_duplicate_ids_are_named(tmp_path):
    t = table()
    t["id"] = ["x", "y", "x"]
    with pytest.raises(CatalogError, match=r"duplicate ids: 'x' \(rows 1, 3\)"):
        read_catalog(_write(t, tmp_path / "c.ecsv"))


def test_rows_without_id(tmp_path):
    t = table()
    t["id"] = MaskedColumn(["a", "", "c"], mask=[False, True, False])
    with pytest.raises(CatalogError, match=r"1 row\(s\) have no id \(rows 2\)"):
        read_catalog(_write(t, tmp_path / "c.ecsv"))


def test_bad_rows_fail_with_their_reason_and_others_stay(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text(
        "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
        "good,1.0,0.05,1.0,0.05,5772,100\n"
        "nan-value,nan,0.05,1.0,0.05,5772,100\n"
        "zero-error,1.0,0.0,1.0,0.05,5772,100\n"
        "negative-error,1.0,0.05,1.0,-0.05,5772,100\n"
        "negative-radius,-1.0,0.05,1.0,0.05,5772,100\n"
        "radius-in-km,695700,3000,1.0,0.05,5772,100\n"
        "cold,1.0,0.05,1.0,0.05,12,1\n"
        "text,1.0,0.05,bright,0.05,5772,100\n"
        "no-teff,1.0,0.05,1.0,0.05,,\n"
        "teff-error-only,1.0,0.05,1.0,0.05,,100\n"
    )
    cat = read_catalog(path)
    by_id = {e.id: e for e in cat.stars}
    assert by_id["good"].star is not None and by_id["good"].error is None
    assert by_id["no-teff"].star is not None and np.isnan(by_id["no-teff"].star.values[2])
    expect = {
        "nan-value": "row 2: R = nan R_sun is not allowed",
        "zero-error": "row 3: uncertainty of R = 0 R_sun is not allowed",
        "negative-error": "row 4: uncertainty of L = -0.05 L_sun is not allowed",
        "negative-radius": "row 5: R = -1 R_sun is not allowed",
        "radius-in-km": "row 6: R = 6.957e+05 R_sun is outside 0.001 to 10000 R_sun",
        "cold": "row 7: T_eff = 12 K is outside 500 to 1e+06 K",
        "text": "row 8: luminosity value 'bright' is not a number",
        "teff-error-only": "row 10: T_eff = nan K is not allowed",
    }
    for sid, start in expect.items():
        assert by_id[sid].star is None
        assert by_id[sid].error.startswith(start), (sid, by_id[sid].error)
    assert cat.n_usable == 2
    assert cat.observed[5]["radius"] == (695700.0, 3000.0)  # what the file said, for the summary


def test_feh_pair(tmp_path):
    t = table()
    t["feh"] = MaskedColumn([0.1, 0.0, 0.0], mask=[False, True, False])
    t["feh_err"] = MaskedColumn([0.05, 0.0, 0.0], mask=[False, True, True])
    cat = read_catalog(_write(t, tmp_path / "c.ecsv"))
    assert cat.stars[0].star.feh == (0.1, 0.05)
    assert cat.stars[1].star.feh is None
    assert cat.stars[2].star is None and "[Fe/H]" in cat.stars[2].error
    t.remove_column("feh_err")
    with pytest.raises(CatalogError, match="feh_err"):
        read_catalog(_write(t, tmp_path / "d.ecsv"))


def test_star_matches_from_user_units(tmp_path):
    cat = read_catalog(_write(table(), tmp_path / "c.ecsv"))
    assert cat.stars[2].star == Star.from_user_units("hot", 2.1, 0.1, 30.0, 2.0, 9500.0, 250.0)

