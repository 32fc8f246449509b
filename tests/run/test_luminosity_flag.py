"""The catalog's optional luminosity_derived column: L computed from the row's own R and T_eff."""

import numpy as np
import pytest

from radwalk.run.catalog import read_catalog

HEADER = "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err"
ROWS = ("a,1.1,0.01,1.2,0.04,5900,40", "b,1.1,0.01,1.2,0.04,5900,40", "c,1.1,0.01,1.2,0.04,5900,40",
        "d,1.1,0.01,1.2,0.04,5900,40")


def _catalog(tmp_path, flags, name="luminosity_derived", rows=ROWS):
    text = "\n".join([f"{HEADER},{name}"] + [f"{r},{f}" for r, f in zip(rows, flags)]) + "\n"
    path = tmp_path / "c.csv"
    path.write_text(text)
    return read_catalog(path)


@pytest.mark.parametrize("flags,want", [
    (("true", "false", "yes", ""), [True, False, True, False]),
    (("1", "0", "0", "1"), [True, False, False, True]),
    (("Y", "n", "T", "F"), [True, False, True, False]),
])
def test_flag_values_are_read(tmp_path, flags, want):
    cat = _catalog(tmp_path, flags)
    assert [e.star.luminosity_derived for e in cat.stars] == want
    for e, derived in zip(cat.stars, want):
        # the flagged rows reach the likelihood without L, the others with it; the record keeps L either way
        assert np.isnan(e.star.observations().values["luminosity"]) == derived
        assert e.star.user_values()["luminosity"][0] == pytest.approx(1.2)


def test_without_the_column_every_luminosity_is_measured(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("\n".join((HEADER,) + ROWS) + "\n")
    cat = read_catalog(path)
    assert not any(e.star.luminosity_derived for e in cat.stars)
    assert all(np.isfinite(e.star.observations().values["luminosity"]) for e in cat.stars)


def test_an_unreadable_flag_fails_its_row_only(tmp_path):
    cat = _catalog(tmp_path, ("true", "maybe", "false", "2"))
    assert [e.star is not None for e in cat.stars] == [True, False, True, False]
    assert "luminosity_derived value 'maybe' is not true/false" in cat.stars[1].error
    assert cat.stars[1].error.startswith("row 2:")


def test_the_flag_column_is_found_in_any_case(tmp_path):
    cat = _catalog(tmp_path, ("true", "false", "false", "false"), name="Luminosity_Derived")
    assert cat.stars[0].star.luminosity_derived
    assert "column 'Luminosity_Derived' read as luminosity_derived" in cat.notices
