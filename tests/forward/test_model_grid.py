"""The grid of main-sequence tracks: phase coordinate, interpolation, cache and provenance, the command.

One tiny grid (3 masses x 2 Z, coarse steps) is built once for the module on the local pool (~25 s of CPU);
the accuracy targets need a denser grid and are checked in the slow test at the end.
"""

from __future__ import annotations

import hashlib
import importlib
import sys
import textwrap

import numpy as np
import pytest

from radwalk import constants as const
from radwalk.errors import ConfigError
from radwalk.forward import model_grid as mg
from radwalk.physics.opacity import default_kappa
from radwalk.physics.structure.calibration import CALIBRATED_Y0, composition_from_helium

TINY = mg.GridSpec(mass_range=(1.5, 3.0), n_mass=3, z_range=(0.01, 0.02), n_z=2, dXc=0.05)


@pytest.fixture(scope="module")
def cache(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cache")
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("RADWALK_CACHE", str(folder))
        yield folder


@pytest.fixture(scope="module")
def tiny(cache):
    return mg.cached_grid(default_kappa, TINY, workers=2, progress=False)


def _stars_at_nodes(grid, i, j):
    truth = grid.node(i, j)
    n = grid.shape[2]
    M = np.full(n, 10.0 ** grid.log_mass[i] * const.M_SUN)
    Z = np.full(n, 10.0 ** grid.log_z[j])
    return M, Z, truth


def test_every_track_reaches_the_end_of_the_main_sequence(tiny):
    assert tiny.header["build"]["failed"] == []
    assert np.all(np.isfinite(tiny.lifetime))
    # More massive stars live shorter (t_MS ~ M / L with L rising steeper than M; KWW 2012, ch. 30).
    assert np.all(np.diff(tiny.lifetime, axis=0) < 0)


def test_phase_coordinate_is_monotone(tiny):
    for i in range(tiny.shape[0]):
        for j in range(tiny.shape[1]):
            node = tiny.node(i, j)
            assert np.all(np.diff(node["age"]) > 0)
            xc = node["central_hydrogen"]
            assert np.all(np.diff(xc) <= 1e-6)  # hydrogen only burns (float32 storage: 1e-7 of X)
            assert xc[0] == pytest.approx(tiny.X0[j], rel=1e-6)  # phase 0: the zero-age, uniform star
            # phase 1: X_c = X_end by definition, up to the difference between the two monotone cubics through
            # the steps, age(X_c) for the lifetime and X_c(age) for the stored values (steps 0.05 in X apart).
            assert xc[-1] == pytest.approx(TINY.X_end, abs=1e-4)
    # Between the nodes the interpolated phase grows with age at fixed mass and Z.
    M = np.full(40, 2.0 * const.M_SUN)
    Z = np.full(40, 0.014)
    life = tiny.lifetime_at(M[:1], Z[:1])[0]
    out, inside = tiny(M, Z, np.linspace(0.0, life, 40))
    assert inside.all()
    assert np.all(np.diff(out["phase"]) > 0)


def test_interpolation_at_a_node_returns_the_node(tiny):
    for i in range(tiny.shape[0]):
        for j in range(tiny.shape[1]):
            M, Z, truth = _stars_at_nodes(tiny, i, j)
            got, inside = tiny(M, Z, truth["age"])
            assert inside.all()
            for name in tiny.names:
                # atol: a fraction that is exactly 0 at the node (no convective core) comes back as the weights'
                # rounding, ~1e-17 (seen on a freshly built grid).
                np.testing.assert_allclose(got[name], truth[name], rtol=1e-9, atol=1e-12, equal_nan=True,
                                           err_msg=name)
            np.testing.assert_allclose(got["main_sequence_lifetime"], tiny.lifetime[i, j], rtol=1e-12)


def test_stored_profiles_at_the_nodes(tiny, tmp_path):
    # The profiles the builder keeps: one per profile phase, on the stored r/R points, and read back from a file.
    from radwalk.forward import grid_profiles as gp

    spec = TINY
    assert tiny.profiles.shape == (3, 2, spec.profile_phases, len(gp.FIELDS), spec.profile_radii)
    assert tiny.profiles.dtype == np.float32 and np.isfinite(tiny.profiles).all()
    again = mg.TrackGrid.load(tiny.save(tmp_path / "again.npz"))
    np.testing.assert_array_equal(again.profiles, tiny.profiles)
    names = [f.name for f in gp.FIELDS]
    for i in range(3):
        for j in range(2):
            life = tiny.lifetime[i, j]
            phases = np.linspace(0.0, 1.0, spec.profile_phases)
            M = np.full(phases.size, 10.0 ** tiny.log_mass[i] * const.M_SUN)
            r_rel, got = tiny.profiles_at(M, 10.0 ** tiny.log_z[j], phases * life)
            np.testing.assert_array_equal(r_rel, gp.radius_nodes(spec.profile_radii))
            # at a node the interpolation is the stored profile itself
            stored = tiny.profiles[i, j]
            np.testing.assert_allclose(np.log10(got["rho"]), stored[:, names.index("rho")], rtol=1e-6)
            np.testing.assert_array_equal(got["convective"], stored[:, names.index("convective")] >= 0.5)
            # The first-passage time to the surface is the star's photon diffusion time, the scalar the grid
            # stores (the same integral, (1/c) int kappa rho r dr, KWW 2012 sect. 5.1 and radwalk DESIGN
            # sect. 5).  At phase 0 both are the zero-age model's own, so they agree to float32 storage.
            node = tiny.node(i, j)
            assert got["diffusion_time_cumulative"][0, -1] == pytest.approx(node["diffusion_time"][0], rel=1e-5)
            # mass coordinate 0 at the centre, 1 at the photosphere, increasing outwards
            assert np.all(got["mass"][:, 0] == 0.0) and np.allclose(got["mass"][:, -1], 1.0, atol=1e-6)
            assert np.all(np.diff(got["mass"], axis=1) >= 0)
    # a grid without one mass node keeps the others' profiles
    assert tiny.without("mass", 1).profiles.shape[0] == 2


def test_leave_one_track_out_on_the_tiny_grid(tiny):
    loo = mg.leave_one_out(tiny, "mass")
    print("\nleave-one-mass-out on 3 x 2 tracks (spacing 0.15 dex, 0.3 dex once one is left out):")
    for name, s in loo["summary"].items():
        print(f"  {name:40s} max {s['max']:.4g}  rms {s['rms']:.4g}")
    e = loo["errors"]
    for name in ("luminosity", "teff", "radius", "central_temperature", "diffusion_time"):
        assert np.all(np.isfinite(e[name])), name
    assert loo["outside"] == 0
    # The stand-in for the left-out 2.1 M_sun star lies between its neighbours: at a given fraction of the
    # main-sequence life a heavier star is brighter and hotter (the mass-luminosity relation).
    for j in range(tiny.shape[1]):
        lo, mid, hi = (tiny.node(i, j) for i in range(3))
        M, Z, _ = _stars_at_nodes(tiny, 1, j)
        got, _ = tiny.without("mass", 1)(M, Z, mid["age"])
        phase = got["phase"]
        for name in ("luminosity", "teff"):
            a = np.interp(phase, tiny.phase, lo[name])
            b = np.interp(phase, tiny.phase, hi[name])
            assert np.all((a < got[name]) & (got[name] < b)), name


def test_points_outside_give_nan_and_a_mask(tiny):
    life = tiny.lifetime_at(np.array([2.0 * const.M_SUN]), 0.014)[0]
    M = np.array([2.0, 1.0, 4.0, 2.0, 2.0, 2.0, 2.0, np.nan, 2.0, -1.0]) * const.M_SUN
    Z = np.array([0.014, 0.014, 0.014, 0.005, 0.03, 0.014, 0.014, 0.014, np.nan, 0.014])
    age = np.array([0.5, 0.5, 0.5, 0.5, 0.5, -0.1, 1.01, 0.5, 0.5, 0.5]) * life
    out, inside = tiny(M, Z, age)
    assert inside.tolist() == [True] + [False] * 9
    for name, v in out.items():
        assert np.isfinite(v[0]) or name.startswith("convective_turnover"), name
        assert np.all(np.isnan(v[1:])), name


def test_file_holds_float32_table_and_provenance(tiny, cache):
    path = mg.grid_path(tiny.key)
    assert path.is_file() and path.parent == cache
    back = mg.TrackGrid.load(path)
    assert back.table.dtype == np.float32
    np.testing.assert_array_equal(back.table, tiny.table)
    np.testing.assert_array_equal(back.lifetime, tiny.lifetime)
    h = back.header
    assert h["format"] == mg.FORMAT and h["key"] == tiny.key
    for module in ("radwalk.physics.structure.solver", "radwalk.physics.structure.evolution",
                   "radwalk.physics.structure.eos", "radwalk.physics.nuclear", "radwalk.physics.structure.tracks"):
        assert module in h["sources"], module
    import radwalk.physics.opacity as op

    with open(op.__file__, "rb") as fh:
        assert h["opacity"]["source_sha256"] == hashlib.sha256(fh.read()).hexdigest()
    assert h["spec"]["n_mass"] == 3 and h["composition_rule"]["Y_p"] == mg.PRIMORDIAL_HELIUM


def test_default_composition_passes_through_the_calibrated_sun():
    X0, Z0 = composition_from_helium(CALIBRATED_Y0)
    assert mg.helium_fraction(0.0) == pytest.approx(0.2471)  # BBN at the Planck 2018 baryon density, from memory
    assert mg.helium_fraction(Z0) == pytest.approx(CALIBRATED_Y0, rel=1e-12)
    assert mg.GridSpec().hydrogen(Z0) == pytest.approx(X0, rel=1e-12)


LAW = """
from radwalk.physics.opacity import default_kappa

SCALE = {scale}


def kappa(rho, T, X, Z):
    return SCALE * default_kappa(rho, T, X, Z)
"""


def test_cache_is_rebuilt_when_the_opacity_source_changes(tmp_path, monkeypatch):
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path / "cache"))
    monkeypatch.syspath_prepend(str(tmp_path))
    law_file = tmp_path / "scaled_law_for_grid.py"
    law_file.write_text(textwrap.dedent(LAW.format(scale="1.0")))
    law = importlib.import_module("scaled_law_for_grid")
    one = mg.GridSpec(mass_range=(2.0, 2.0), n_mass=1, z_range=(0.014, 0.014), n_z=1, n_phase=11, dXc=0.05)
    try:
        assert mg.cached_grid(law.kappa, one, build=False) is None
        first = mg.cached_grid(law.kappa, one, workers=1, progress=False)
        again = mg.cached_grid(law.kappa, one, build=False)
        assert again is not None and again.key == first.key
        law_file.write_text(textwrap.dedent(LAW.format(scale="1.25")))
        law = importlib.reload(law)
        assert mg.grid_key(law.kappa, one) != first.key
        assert mg.cached_grid(law.kappa, one, build=False) is None
        second = mg.cached_grid(law.kappa, one, workers=1, progress=False)
    finally:
        sys.modules.pop("scaled_law_for_grid", None)
    assert second.key != first.key
    assert len(mg.list_grids(tmp_path / "cache")) == 2  # the cache folder alone (list_grids() adds the shipped one)
    # A more opaque star is fainter (homology: L ~ 1 / kappa_0 at fixed M and mu; KWW 2012, ch. 20).
    assert second.node(0, 0)["luminosity"][0] < first.node(0, 0)["luminosity"][0]


def test_grid_command_lists_and_describes(tiny, cache, capsys):
    from radwalk.cli.main import main

    assert main(["grid", "list"]) == 0
    listed = capsys.readouterr().out
    assert tiny.key in listed
    assert main(["grid", "info", tiny.key[:8]]) == 0
    info = capsys.readouterr().out
    assert "luminosity" in info and "1.5..3.0 M_sun x 3" in info
    assert main(["grid", "info", "no-such-key"]) == 2
    assert main(["grid", "build", "--masses", "4", "--metallicities", "2", "--dry-run"]) == 0
    assert "8 tracks, estimated" in capsys.readouterr().out


MODERATE = mg.GridSpec(mass_range=(0.8, 5.0), n_mass=8, z_range=(0.003, 0.04), n_z=3)
# The accuracy targets on the main sequence (common practice, no source): dex in L and T_eff,
# relative in R and in the lifetime (age at a given phase).
TARGETS = {"luminosity": 0.01, "teff": 0.005, "radius": 0.01, "main_sequence_lifetime": 0.02}


def _largest_errors(first_left_out):
    """Largest leave-one-mass-out errors of the moderate grid over left-out masses from index ``first_left_out``."""
    grid = mg.cached_grid(default_kappa, MODERATE, workers=2, progress=False)
    e = mg.leave_one_out(grid, "mass")["errors"]
    return {name: float(np.nanmax(np.abs(e[name][first_left_out - 1:]))) for name in TARGETS}


@pytest.mark.slow
def test_interpolation_accuracy_above_2_5_msun():
    """Leave-one-mass-out on 8 masses 0.8-5 M_sun x 3 Z (~2.5 CPU minutes, cached after the first run):
    the left-out 2.96 and 3.85 M_sun tracks, with 0.23 dex between the remaining neighbours."""
    worst = _largest_errors(5)
    for name, target in TARGETS.items():
        assert worst[name] < target, (name, worst[name])


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="measured on 8 masses 0.8-5 M_sun x 3 Z, leave-one-mass-out: L 0.077 dex, "
                   "T_eff 0.026 dex, R 13 %, t_MS 19 % at 1.04 M_sun (and 0.05 dex, 8 %, 15 % at 1.35): the "
                   "convective core appears between 1.0 and 1.5 M_sun and bends log t_MS(log M); 0.23 dex "
                   "gaps do not follow it")
def test_interpolation_accuracy_over_0_8_to_5_msun():
    worst = _largest_errors(1)
    for name, target in TARGETS.items():
        assert worst[name] < target, (name, worst[name])


# ---------------------------------------------------------------------------- default nodes, cuts, runners
def test_default_grid_covers_the_asked_ranges():
    spec = mg.GridSpec()
    # The issue asks for at least 0.6-8 M_sun and Z 0.003-0.04, with >= 6 metallicities (the leave-one-out of
    # a 3-value Z axis missed the targets).
    assert spec.mass_range == (0.6, 8.0) and spec.z_range == (0.003, 0.04) and spec.n_z >= 6
    steps = np.diff(np.log10(spec.masses()))
    assert steps.max() < 0.07
    # closer where convective cores appear
    close = (spec.masses()[1:] > 0.9) & (spec.masses()[1:] <= 1.3)
    assert steps[close].max() < 0.025


def test_restricted_spec_keeps_the_stencil_nodes():
    spec = mg.GridSpec()
    cut = spec.restricted((1.02, 1.28), (0.012, 0.02))
    m, z = spec.masses(), spec.metallicities()
    # every node of the range plus two beyond each end, as the 4-point stencil needs
    assert cut.masses().tolist() == m[(m >= 0.9) & (m <= 1.4)].tolist()
    assert cut.metallicities().tolist() == z[(z >= 0.0046) & (z <= 0.04)].tolist()
    assert cut.alpha_mlt == spec.alpha_mlt and cut.n_phase == spec.n_phase
    with pytest.raises(ConfigError, match="outside the grid"):
        spec.restricted((20.0, 30.0))


def test_catalog_ranges_follow_luminosity_and_metallicity():
    (m_lo, m_hi), (z_lo, z_hi) = mg.catalog_ranges([0.8, 3.0, np.nan], [[0.0, 0.05], [np.nan, np.nan], [0.1, 0.05]])
    assert m_lo == pytest.approx((0.8 / 3.0) ** (1 / 3.5)) and m_hi == pytest.approx(9.0 ** (1 / 3.5))
    # [Fe/H] = 0 gives the reference (Z/X) of the Sun under the composition rule
    z0 = mg.metallicity_from_feh(0.0)
    assert z0 / mg.GridSpec().hydrogen(z0) == pytest.approx(const.Z_SUN / const.X_SUN, rel=1e-12)
    assert z_lo == pytest.approx(mg.metallicity_from_feh(-0.15))
    assert z_hi == pytest.approx(mg.metallicity_from_feh(0.25))
    assert mg.catalog_ranges([1.0])[1] is None
    with pytest.raises(ConfigError, match="no star"):
        mg.catalog_ranges([np.nan])


def test_grid_build_for_a_catalog_prints_the_cut(tmp_path, capsys):
    from radwalk.cli.main import main

    cat = tmp_path / "two.csv"
    cat.write_text("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err,feh,feh_err\n"
                   "a,1.0,0.02,1.0,0.05,5770,60,0.0,0.05\nb,1.3,0.03,2.5,0.1,6300,70,0.05,0.05\n")
    assert main(["grid", "build", "--for-catalog", str(cat), "--opacity", "kramers", "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "2 stars need 24 of 39 masses (0.6-2 M_sun)" in out, out


def test_a_custom_laws_grid_restricted_to_a_mass_range(tmp_path, monkeypatch):
    """A non-default law (Kramers absorption) gets its own grid, cut to a mass range: 6 of 8 coarse tracks."""
    from radwalk.host.config import RunConfig
    from radwalk.inference.fit import stages_for

    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path))
    stages = stages_for(RunConfig(stages={"opacity": "kramers"}))
    kramers = mg.track_opacity(stages.bound_opacity(stages.defaults()))
    full = mg.GridSpec(mass_nodes=(2.0, 2.5, 3.0, 3.5, 4.0, 4.5, 5.0, 6.0), z_nodes=(0.014,), n_phase=11, dXc=0.05)
    lo, hi = 3.6, 3.9
    cut = full.restricted((lo, hi))
    # the full grid's nodes over the range and two beyond each end, so every 4-point stencil inside the range is
    # the full grid's: the cut grid interpolates there exactly as the full one would
    assert cut.masses().tolist() == [2.5, 3.0, 3.5, 4.0, 4.5, 5.0]
    assert cut.evolve_options() == full.evolve_options() and cut.n_phase == full.n_phase
    x = np.log10(np.linspace(lo, hi, 7))
    (s_cut, *_), (s_full, *_) = mg._Axis(np.log10(cut.masses())).locate(x), mg._Axis(np.log10(full.masses())).locate(x)
    for a, b in zip(s_cut, s_full):
        assert cut.masses()[a:a + 4].tolist() == full.masses()[b:b + 4].tolist()
    assert mg.estimate_cpu_seconds(cut) == pytest.approx(mg.estimate_cpu_seconds(full) * 6 / 8)

    grid = mg.cached_grid(kramers, cut, workers=2, progress=False)
    assert grid.header["build"]["failed"] == []
    assert grid.header["opacity"]["law"] == "kramers"
    assert grid.key != mg.grid_key(default_kappa, cut) and mg.grid_path(grid.key).is_file()
    np.testing.assert_allclose(10.0 ** grid.log_mass, cut.masses(), rtol=1e-12)
    M = np.linspace(lo, hi, 5) * const.M_SUN
    _, ok = grid(M, 0.014, 0.5 * grid.lifetime_at(M, 0.014))
    assert ok.all()

    # The full grid's track at a node inside the range, evolved again here, is the cut grid's.
    i = cut.masses().tolist().index(4.0)
    track = mg._one_track(4.0 * const.M_SUN, full.hydrogen(0.014), 0.014, kramers, full.evolve_options(),
                          full.n_phase)
    assert track.lifetime == pytest.approx(grid.lifetime[i, 0], rel=1e-5)
    log = np.array([q["log10"] for q in grid.header["quantities"]])
    with np.errstate(divide="ignore", invalid="ignore"):
        fresh = np.where(log, np.log10(track.values), track.values).astype(np.float32)
    # float32 storage (6e-8) and the solver's convergence (1e-6 relative) bound the match, as for the shipped grid
    np.testing.assert_allclose(fresh, grid.table[i, 0], rtol=0, atol=2e-5, equal_nan=True)


def test_shipped_grid_is_found_before_building(tiny, tmp_path, monkeypatch):
    folder = tmp_path / "shipped"
    monkeypatch.setattr(mg, "SHIPPED_DIR", folder)
    tiny.save(mg.shipped_path(mg.grid_key(default_kappa, TINY)))
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path / "empty-cache"))
    found = mg.cached_grid(default_kappa, TINY, build=False)
    assert found is not None
    np.testing.assert_array_equal(found.table, tiny.table)
    assert [h["shipped"] for h in mg.list_grids()] == [True]


@pytest.mark.dask
def test_dask_cluster_builds_the_same_tracks(tmp_path, monkeypatch):
    from radwalk.run.executors import dask_tracks

    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path))
    one = mg.GridSpec(mass_nodes=(2.0, 3.0), z_nodes=(0.014,), n_phase=11, dXc=0.05)
    local = mg.build_grid(default_kappa, one, workers=1, progress=False)
    remote = mg.build_grid(default_kappa, one, workers=2, progress=False, runner=dask_tracks(None))
    assert remote.key == local.key
    np.testing.assert_array_equal(remote.table, local.table)
