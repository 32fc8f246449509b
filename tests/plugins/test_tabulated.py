"""The tabulated opacity law: reading both formats, interpolation, edges, bad files."""

from __future__ import annotations

import pickle

import astropy.units as u
import numpy as np
import pytest
from astropy.table import Table

from radwalk.errors import ConfigError, ModelError, ValidityWarning
from radwalk.host.registry import Registry
from radwalk.plugins.opacity import radwalk_opacities
from radwalk.plugins.tabulated import NEEDS_TABLE, Tabulated, read_table

# Grid of the test tables: 0.1 dex in both axes, inside the Kramers law's stated range.
LOG_RHO = np.round(np.arange(-8.0, 2.0 + 1e-9, 0.1), 6)
LOG_T = np.round(np.arange(4.0, 8.0 + 1e-9, 0.1), 6)
XS = (0.60, 0.75)
ZS = (0.01, 0.03)
# The Kramers law's guillotine fit t = 2.82 (rho (1+X))^0.2 is clipped at t = 1, which puts a
# kink in kappa(rho) at rho (1+X) = 5.63e-3 g/cm^3, i.e. log rho = -2.45 .. -2.49 for these X.
LOG_RHO_KINK = -2.47


def _laws():
    return {c.name: c for c in radwalk_opacities()}


def analytic(rho, T, X, Z):
    """Electron scattering + Kramers with their default parameters, cm^2/g."""
    laws = _laws()
    return laws["electron-scattering"].kappa(rho, T, X, Z) + laws["kramers"].kappa(rho, T, X, Z)


def write_text(path, log_rho=LOG_RHO, log_T=LOG_T, xs=XS, zs=ZS, law=analytic,
               units="g/cm^3 K cm^2/g", rho_offset=0.0):
    """A table in the text layout; ``rho_offset`` is added to the written log rho values."""
    lines = ["# test table: electron scattering + Kramers", "# axes: log_rho log_T", f"# units: {units}"]
    for X in xs:
        for Z in zs:
            lines += [f"# X: {X}", f"# Z: {Z}", "        " + " ".join(f"{t:.3f}" for t in log_T)]
            for r in log_rho:
                values = np.log10(law(10.0**r, 10.0**log_T, X, Z))
                lines.append(f"{r + rho_offset:8.3f} " + " ".join(f"{v:.10f}" for v in values))
    path.write_text("\n".join(lines) + "\n")
    return path


def ecsv_table(log_rho=LOG_RHO, log_T=LOG_T, xs=XS, zs=ZS, law=analytic):
    R, T, X, Z = (a.ravel() for a in np.meshgrid(log_rho, log_T, xs, zs, indexing="ij"))
    tab = Table({"log_rho": R, "log_T": T, "X": X, "Z": Z,
                 "log_kappa": np.log10(law(10.0**R, 10.0**T, X, Z))})
    tab["log_rho"].unit = u.dex(u.g / u.cm**3)
    tab["log_T"].unit = u.dex(u.K)
    tab["log_kappa"].unit = u.dex(u.cm**2 / u.g)
    return tab


def write_ecsv(path, tab=None):
    (ecsv_table() if tab is None else tab).write(path, format="ascii.ecsv", overwrite=True)
    return path


@pytest.fixture(scope="module")
def text_law(tmp_path_factory):
    return Tabulated().configure(table=str(write_text(tmp_path_factory.mktemp("tab") / "law.txt")))


def random_points(n=8, g=20000, seed=1):
    rng = np.random.default_rng(seed)
    rho = 10.0 ** rng.uniform(LOG_RHO[0], LOG_RHO[-1], (n, g))
    T = 10.0 ** rng.uniform(LOG_T[0], LOG_T[-1], (n, g))
    X = rng.uniform(*XS, (n, 1))
    Z = rng.uniform(*ZS, (n, 1))
    return rho, T, X, Z


def test_reproduces_the_analytic_law_between_grid_points(text_law):
    rho, T, X, Z = random_points()
    err = np.abs(text_law.kappa(rho, T, X, Z) / analytic(rho, T, X, Z) - 1.0)
    assert err.shape == rho.shape
    # Measured: 0.73 % at most, at the guillotine kink (a corner in kappa that a cubic cannot follow);
    # 0.020 % away from it.  Bounds: 1 % and 0.05 %.
    assert err.max() < 0.01
    smooth = np.abs(np.log10(rho) - LOG_RHO_KINK) > 0.3
    assert err[smooth].max() < 5e-4


def test_passes_through_the_table_values(text_law):
    R, T = np.meshgrid(10.0**LOG_RHO, 10.0**LOG_T, indexing="ij")
    for X in XS:
        for Z in ZS:
            # 10 decimals of log kappa are written: 2.3e-10 relative.
            np.testing.assert_allclose(text_law.kappa(R, T, X, Z), analytic(R, T, X, Z), rtol=1e-8)


def test_ecsv_gives_the_same_law_as_text(tmp_path, text_law):
    law = Tabulated().configure(table=str(write_ecsv(tmp_path / "law.ecsv")))
    rho, T, X, Z = random_points(n=4, g=2000, seed=2)
    np.testing.assert_allclose(law.kappa(rho, T, X, Z), text_law.kappa(rho, T, X, Z), rtol=1e-9)


def test_units_are_converted(tmp_path, text_law):
    # The same densities written in kg/m^3: log10 values larger by 3.
    law = Tabulated().configure(
        table=str(write_text(tmp_path / "si.txt", units="kg/m^3 K cm^2/g", rho_offset=3.0)))
    tab = ecsv_table()
    tab["log_rho"] = tab["log_rho"] + 3.0
    tab["log_rho"].unit = u.dex(u.kg / u.m**3)
    law_ecsv = Tabulated().configure(table=str(write_ecsv(tmp_path / "si.ecsv", tab)))
    rho, T, X, Z = random_points(n=2, g=1000, seed=3)
    expected = text_law.kappa(rho, T, X, Z)
    np.testing.assert_allclose(law.kappa(rho, T, X, Z), expected, rtol=1e-9)
    np.testing.assert_allclose(law_ecsv.kappa(rho, T, X, Z), expected, rtol=1e-9)
    assert law.validity.rho == pytest.approx(text_law.validity.rho, rel=1e-12)


def test_single_composition_from_ecsv_meta(tmp_path):
    tab = ecsv_table(xs=(0.7,), zs=(0.02,))
    tab.remove_columns(["X", "Z"])
    tab.meta.update({"X": 0.7, "Z": 0.02})
    law = Tabulated().configure(table=str(write_ecsv(tmp_path / "one.ecsv", tab)))
    assert law.validity.X == (0.7, 0.7) and law.validity.Z == (0.02, 0.02)
    rho, T = 10.0 ** np.array([-3.33, 0.41]), 10.0 ** np.array([5.55, 7.07])
    np.testing.assert_allclose(law.kappa(rho, T, 0.7, 0.02), analytic(rho, T, 0.7, 0.02), rtol=5e-4)


def test_broadcasting_matches_a_loop(text_law):
    rho, T, X, Z = random_points(n=5, g=300, seed=4)
    full = text_law.kappa(rho, T, X, Z)
    for i in range(5):
        np.testing.assert_array_equal(text_law.kappa(rho[i], T[i], X[i, 0], Z[i, 0]), full[i])
    assert np.shape(text_law.kappa(rho[0, 0], T[0, 0], X[0, 0], Z[0, 0])) == ()
    # [n] inputs all round, as a relation passes them
    np.testing.assert_array_equal(text_law.kappa(rho[:, 0], T[:, 0], X[:, 0], Z[:, 0]), full[:, 0])


def test_validity_is_the_grid_and_its_edges_do_not_warn(text_law):
    v = text_law.validity
    assert v.rho == pytest.approx((1e-8, 1e2), rel=1e-12)
    assert v.T == pytest.approx((1e4, 1e8), rel=1e-12)
    assert v.X == XS and v.Z == ZS
    # pytest turns any warning into an error: the corners must evaluate silently.
    rho = np.array([v.rho[0], v.rho[1], v.rho[0], v.rho[1]])
    T = np.array([v.T[0], v.T[0], v.T[1], v.T[1]])
    k = text_law.kappa(rho, T, v.X[1], v.Z[0])
    np.testing.assert_allclose(k, analytic(rho, T, v.X[1], v.Z[0]), rtol=1e-8)


def test_clip_policy_warns_and_uses_the_edge(text_law):
    with pytest.warns(ValidityWarning, match=r"law.txt\) used outside its table, values clipped to the grid "
                                             r"edge: rho above 100 g/cm\^3$"):
        k = text_law.kappa(np.array([1e3, 1.0]), np.array([1e6, 1e6]), 0.7, 0.02)
    np.testing.assert_allclose(k[0], text_law.kappa(1e2, 1e6, 0.7, 0.02), rtol=1e-12)
    with pytest.warns(ValidityWarning, match=r"edge: T below 10000 K, X above 0.75$"):
        k = text_law.kappa(1.0, np.array([1e6, 10.0]), 0.9, 0.02)
    np.testing.assert_allclose(k, text_law.kappa(1.0, np.array([1e6, 1e4]), 0.75, 0.02), rtol=1e-12)


def test_error_policy_raises_naming_the_point(text_law):
    strict = text_law.configure(outside="error")
    assert strict.table is text_law.table
    with pytest.raises(ModelError, match=r"T=3000 K.*outside the table grid"):
        strict.kappa(np.array([1e-3, 1e-3]), np.array([1e5, 3e3]), 0.7, 0.02)
    # inside it gives the same values as the clipping one
    assert strict.kappa(1e-3, 1e5, 0.7, 0.02) == text_law.kappa(1e-3, 1e5, 0.7, 0.02)


def test_unconfigured_and_bad_options():
    with pytest.raises(ConfigError, match="tabulated opacity needs a table: --set table=PATH"):
        Tabulated().kappa(1.0, 1e6, 0.7, 0.02)
    assert NEEDS_TABLE == "tabulated opacity needs a table: --set table=PATH"
    with pytest.raises(ConfigError, match="no option 'tabel'"):
        Tabulated().configure(tabel="x.txt")
    with pytest.raises(ConfigError, match="outside='extrapolate' is not allowed"):
        Tabulated().configure(outside="extrapolate")
    assert {o.name for o in Tabulated.options} == {"table", "outside"}


def test_pickles_for_worker_processes(text_law):
    copy = pickle.loads(pickle.dumps(text_law))
    rho, T, X, Z = random_points(n=2, g=100, seed=5)
    np.testing.assert_array_equal(copy.kappa(rho, T, X, Z), text_law.kappa(rho, T, X, Z))


def test_registered_as_a_built_in():
    entry = Registry(entry_points=False).entries["opacity"]["tabulated"]
    assert entry.source == "built-in"
    assert isinstance(entry.component, Tabulated) and entry.component.table is None


# -- bad files ---------------------------------------------------------------
def _small_text(path, edit=None):
    """A 5 x 5 one-composition text table, optionally edited line by line."""
    lr = np.arange(-4.0, 0.01, 1.0)
    lt = np.arange(4.0, 8.01, 1.0)
    write_text(path, log_rho=lr, log_T=lt, xs=(0.7,), zs=(0.02,))
    lines = path.read_text().splitlines()
    if edit:
        lines = edit(lines)
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def _replace(old, new):
    return lambda lines: [ln.replace(old, new) for ln in lines]


def _drop(prefix):
    return lambda lines: [ln for ln in lines if not ln.startswith(prefix)]


def _change_line(index, fn):
    def edit(lines):
        lines = list(lines)
        lines[index] = fn(lines[index])
        return lines
    return edit


# header lines 0-4 ("# test", axes, units, X, Z), the log T row is line index 5, data from 6
TEXT_CASES = {
    "ragged": (_change_line(8, lambda ln: " ".join(ln.split()[:-1])),
               r"line 9: ragged grid: 4 log_kappa values after log_rho, but the log_T row \(line 6\) has 5"),
    "log T not monotonic": (_replace("5.000 6.000", "6.000 5.000"),
                            r"line 6: log_T values are not strictly increasing \(6 then 5\)"),
    "log rho not monotonic": (_change_line(7, lambda ln: "  -5.000 " + ln.split(None, 1)[1]),
                              r"line 8: log_rho values are not strictly increasing \(-4 then -5\)"),
    "no units line": (_drop("# units"), r"missing header line '# units: g/cm\^3 K cm\^2/g'"),
    "no axes line": (_drop("# axes"), r"missing header line '# axes: log_rho log_T'"),
    "no Z line": (_drop("# Z"), r"line 5: the block starting line 4 has no header line '# Z: ...'"),
    "wrong units": (_replace("# units: g/cm^3 K cm^2/g", "# units: g/cm^3 s cm^2/g"),
                    r"line 3: T has unit s, which is not a unit of temperature"),
    "unknown unit": (_replace("# units: g/cm^3 K cm^2/g", "# units: g/cm^3 K cm^2/gramm"),
                     r"line 3: 'cm\^2/gramm' is not a unit astropy can read"),
    "NaN entry": (_change_line(9, lambda ln: ln.rsplit(None, 1)[0] + " nan"),
                  r"line 10: entry 'nan' is not a finite number"),
    "transposed axes": (_replace("# axes: log_rho log_T", "# axes: log_T log_rho"),
                        r"line 2: axes must read 'log_rho log_T'"),
    "too few points": (lambda lines: lines[:9], r"3 log_rho values; bicubic interpolation needs at least 4"),
}


@pytest.mark.parametrize("case", list(TEXT_CASES))
def test_bad_text_tables_are_refused_with_one_clear_line(tmp_path, case):
    edit, message = TEXT_CASES[case]
    path = _small_text(tmp_path / "bad.txt", edit)
    with pytest.raises(ConfigError, match=message) as info:
        Tabulated().configure(table=path)
    text = str(info.value)
    assert text.startswith(f"opacity table {path}: ") and "\n" not in text


def _ecsv_missing_row(tab):
    tab.remove_row(7)
    return tab, r"rows with X=0.75, Z=0.03: ragged grid: the point log_rho=-8, log_T=4.1 is missing"


def _ecsv_nan(tab):
    tab["log_kappa"][11] = np.nan
    return tab, r"data row 12: log_kappa is nan"


def _ecsv_wrong_unit(tab):
    tab["log_T"].unit = u.dex(u.s)
    return tab, r"column log_T has unit s, which is not a unit of temperature"


def _ecsv_not_log(tab):
    tab["log_rho"].unit = u.g / u.cm**3
    return tab, r"column log_rho has unit g / cm3; it must be a log10 unit such as dex\(g / cm3\)"


def _ecsv_no_unit(tab):
    tab["log_kappa"].unit = None
    return tab, r"column log_kappa has no unit"


def _ecsv_no_Z(tab):
    tab.remove_column("Z")
    return tab, r"states no Z: give a column Z"


def _ecsv_missing_composition(tab):
    drop = (tab["X"] == 0.75) & (tab["Z"] == 0.03)
    tab.remove_rows(np.flatnonzero(drop))
    return tab, r"no table for X = 0.75, Z = 0.03: the compositions must form a full grid"


@pytest.mark.parametrize("make", [_ecsv_missing_row, _ecsv_nan, _ecsv_wrong_unit, _ecsv_not_log,
                                  _ecsv_no_unit, _ecsv_no_Z, _ecsv_missing_composition])
def test_bad_ecsv_tables_are_refused_with_one_clear_line(tmp_path, make):
    tab, message = make(ecsv_table(log_rho=LOG_RHO[:6], log_T=LOG_T[:5]))
    path = str(write_ecsv(tmp_path / "bad.ecsv", tab))
    with pytest.raises(ConfigError, match=message) as info:
        read_table(path)
    assert str(info.value).startswith(f"opacity table {path}: ")


def test_missing_file_is_named(tmp_path):
    path = tmp_path / "nowhere.txt"
    with pytest.raises(ConfigError, match=f"opacity table {path}: file does not exist"):
        Tabulated().configure(table=str(path))
