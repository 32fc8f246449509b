"""The track-grid relation and profile: the grid's stars at (M, Z, age), the age's support, refusals, `radwalk model`.

All tests use the small session grid of tests/conftest.py (0.8-2 M_sun x Z 0.01, 0.02, steps of 0.05 in X_c).
"""

from __future__ import annotations

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.errors import ModelError
from radwalk.forward.model_grid import TrackGrid
from radwalk.forward.stages import StageSet
from radwalk.host.components import Observations
from radwalk.plugins.track_grid import AGE_OF_UNIVERSE_GYR, GYR, hydrogen_of

NAMES = {"profile": "track-grid", "relation": "track-grid"}


@pytest.fixture(scope="module")
def stages(registry, small_track_grid):
    return StageSet.build(registry, NAMES, {"track-grid": {"grid": small_track_grid}})


@pytest.fixture(scope="module")
def grid(small_track_grid):
    return TrackGrid.load(small_track_grid)


def _values(stages, mass, Z, age, X=0.7):
    v = stages.defaults()
    n = np.size(mass)
    v.update(mass=np.atleast_1d(np.asarray(mass, dtype=float)), X=np.full(n, X),
             Z=np.broadcast_to(np.asarray(Z, dtype=float), (n,)).copy(),
             age=np.broadcast_to(np.asarray(age, dtype=float), (n,)).copy())
    return v


def test_options_reach_both_stages_and_state_the_grid_range(stages):
    for comp in (stages.profile, stages.relation):
        assert comp.validity.mass == pytest.approx((0.8, 2.0))
        assert comp.validity.Z == pytest.approx((0.01, 0.02))
    # the sampled X never reaches them, so no X is ever "outside their range"
    assert stages.validity_messages(_values(stages, [1.0, 1.5], [0.012, 0.015], [1.0, 1.0], X=0.78)) == []
    # one age parameter, sampled, shared by the two stages
    ages = [p for p in stages.component_params() if p.name == "age"]
    assert len(ages) == 1 and ages[0].sampled and ages[0].upper == AGE_OF_UNIVERSE_GYR


def test_relation_is_the_grid_at_the_samples_and_ignores_the_sampled_x(stages, grid):
    M = np.array([0.9, 1.3, 1.7])
    Z = np.array([0.012, 0.015, 0.018])
    life = grid.lifetime_at(M * k.M_SUN, Z) / GYR
    age = np.array([0.1, 0.5, 0.9]) * life
    pred = stages.predict(_values(stages, M, Z, age))
    want, inside = grid(M * k.M_SUN, Z, age * GYR)
    assert inside.all()
    np.testing.assert_allclose(pred["radius"], want["radius"], rtol=1e-12)
    np.testing.assert_allclose(pred["luminosity"], want["luminosity"], rtol=1e-12)
    # T_eff from R and L agrees with the models' own T_eff to the grid's interpolation (float32 storage and
    # interpolating three quantities separately: 1e-3 is far above the first, well below a real mismatch)
    np.testing.assert_allclose(pred["teff"], want["teff"], rtol=1e-3)
    other_x = stages.predict(_values(stages, M, Z, age, X=0.6))
    np.testing.assert_array_equal(other_x["radius"], pred["radius"])


def test_stars_older_than_their_main_sequence_or_outside_the_grid_have_no_model(stages, grid):
    life = float(grid.lifetime_at(np.array([1.5 * k.M_SUN]), np.array([0.014]))[0]) / GYR
    v = _values(stages, [1.5, 1.5, 1.5, 3.0, 1.0], [0.014, 0.014, 0.014, 0.014, 0.05],
                [0.99 * life, 1.01 * life, -0.1, 0.1, 1.0])
    pred = stages.predict(v)
    assert np.isfinite(pred["radius"][0])
    assert np.isnan(pred["radius"][1:]).all()
    assert stages.support(v).tolist() == [True, False, False, False, False]


def test_support_caps_the_age_at_the_age_of_the_universe(stages, grid):
    # 0.8 M_sun lives longer than the universe is old: its ages stop at 13.8 Gyr, not at its lifetime
    life = float(grid.lifetime_at(np.array([0.8 * k.M_SUN]), np.array([0.01]))[0]) / GYR
    assert life > AGE_OF_UNIVERSE_GYR
    v = _values(stages, [0.8, 0.8], [0.01, 0.01], [13.7, 13.9])
    assert stages.support(v).tolist() == [True, False]


def test_grid_quantities_agree_with_the_solved_star_in_units_and_definitions(stages):
    # The scalars a fit reports come from the grid; the bands' structures are solved.  At 1 M_sun and 4 Gyr
    # they must agree to the small grid's interpolation error (measured 0.3-2 % here; a wrong unit or the
    # factor 2 between |Omega|/L and |Omega|/(2L) would be off by 2 or more).
    v = _values(stages, [1.0], [0.014], [4.0])
    quick = stages.quick_quantities(v)
    prof, tr = stages.structure(v, [np.nan], [np.nan])
    for name, rtol in (("central_temperature", 0.05), ("central_density", 0.05), ("diffusion_time", 0.05),
                       ("energy_transport_time", 0.05), ("kelvin_helmholtz_time", 0.05),
                       ("mean_free_path_center", 0.1), ("dynamical_time", 0.05)):
        assert quick[name][0] == pytest.approx(tr.scalars[name][0], rel=rtol), name
    assert quick["central_hydrogen"][0] == pytest.approx(tr.scalars["central_hydrogen"][0], abs=0.03)
    assert quick["convective_envelope_base_radius"][0] == pytest.approx(
        tr.scalars["convective_envelope_base_radius"][0], abs=0.03)
    assert quick["main_sequence_lifetime"][0] == pytest.approx(tr.scalars["main_sequence_lifetime"][0], rel=1e-12)
    # the solved star has the grid's composition, whatever X the sample carried
    assert prof.X[0] == pytest.approx(hydrogen_of(TrackGrid.load(stages.relation.grid_file), 0.014))


def _observed(R, L):
    nan = float("nan")
    return Observations({"radius": R * k.R_SUN, "luminosity": L * k.L_SUN, "teff": nan},
                        {"radius": 0.02 * R * k.R_SUN, "luminosity": 0.04 * L * k.L_SUN, "teff": nan})


def test_the_relation_says_where_a_star_lies_off_the_main_sequence(stages):
    kappa = stages.bound_opacity(stages.defaults())
    rel = stages.relation
    # A subgiant-like star, 6 R_sun at 15 L_sun (invented): larger than any star of that luminosity at central
    # hydrogen exhaustion (a 1.7 M_sun star ends its main sequence near 2.5 R_sun; KWW 2012 ch. 31, from memory).
    note = rel.unreachable_note(_observed(6.0, 15.0), opacity=kappa, Z=(0.001, 0.05))
    assert note.startswith("beyond the end of the main sequence for every allowed composition: ")
    # A compact star, 0.5 R_sun at 2 L_sun (invented): smaller than the zero-age star of that luminosity.
    note = rel.unreachable_note(_observed(0.5, 2.0), opacity=kappa, Z=(0.001, 0.05))
    assert note.startswith("below the zero-age main sequence for every allowed composition: ")
    # A main-sequence star taken from the grid itself is on it: nothing to say.
    v = _values(stages, [1.2], [0.014], [2.0])
    pred = stages.predict(v)
    star = _observed(pred["radius"][0] / k.R_SUN, pred["luminosity"][0] / k.L_SUN)
    assert rel.unreachable_note(star, opacity=kappa, Z=(0.001, 0.05)) is None


def test_model_of_one_star_at_any_age_on_its_track(small_track_grid, grid):
    from radwalk.api import one_star

    life = float(grid.lifetime_at(np.array([1.2 * k.M_SUN]), np.array([0.014]))[0]) / GYR
    settings = {"grid": small_track_grid}
    # near the end of the main sequence: the solved track may end a little before the grid's lifetime, and the
    # star is then its last model, not a refusal
    old = one_star(1.2, 0.7, 0.014, stages=dict(NAMES), settings=dict(settings), age=0.98 * life).summary
    assert old["main_sequence_lifetime_gyr"] == pytest.approx(life, rel=1e-9)
    assert old["age_gyr"] == pytest.approx(0.98 * life)
    assert 0.0 <= old["central_hydrogen"] < 0.1
    assert old["stages"]["profile"] == old["stages"]["relation"] == "track-grid"
    # the star has the grid's composition, and the summary says so rather than echo the X asked for
    assert old["X"] == pytest.approx(float(hydrogen_of(grid, 0.014)))
    assert any("its own composition rule" in w for w in old["warnings"])
    with pytest.raises(ModelError, match=r"beyond the end of the main sequence of a 1.2 M_sun star with Z = 0.014: "
                                         r"its main-sequence lifetime is"):
        one_star(1.2, 0.7, 0.014, stages=dict(NAMES), settings=dict(settings), age=1.05 * life)


def test_model_json_from_the_command_line(small_track_grid, capsys):
    import json

    from radwalk.cli.main import main

    code = main(["model", "--mass", "1.0", "--Z", "0.014", "--age", "4.57", "--profile", "track-grid",
                 "--relation", "track-grid", "--set", f"grid={small_track_grid}", "--json"])
    assert code == 0
    d = json.loads(capsys.readouterr().out)
    # The Sun's main-sequence lifetime is about 10 Gyr (Kippenhahn, Weigert & Weiss 2012, ch. 30; from memory);
    # these models (analytic opacity, no diffusion) end it at X_c = 0.01 somewhat earlier: the check is on the
    # scale, and at 4.57 Gyr about half the central hydrogen is left (standard solar models give X_c ~ 0.34-0.36,
    # Bahcall et al. 2005, ApJ 621, L85; from memory).
    assert 7.0 < d["main_sequence_lifetime_gyr"] < 12.0
    assert 0.25 < d["central_hydrogen"] < 0.5


def test_options_restrict_the_grid_to_build_and_refuse_nonsense():
    from radwalk.errors import ConfigError
    from radwalk.forward.model_grid import GridSpec, estimate_cpu_seconds
    from radwalk.plugins.track_grid import TrackGridRelation

    full = TrackGridRelation().spec()
    assert full == GridSpec()  # no option: the default grid, which the package ships
    part = TrackGridRelation().configure(grid_mass="0.9..1.1", grid_z="0.01..0.02")
    spec = part.spec()
    # the tracks covering the range, with the full grid's nodes (so its interpolation is the full grid's there)
    assert spec.masses()[0] <= 0.9 and spec.masses()[-1] >= 1.1
    assert set(spec.masses()) <= set(full.masses()) and spec.n_mass < full.n_mass
    assert spec.metallicities()[0] <= 0.01 and spec.metallicities()[-1] >= 0.02
    assert estimate_cpu_seconds(spec) < estimate_cpu_seconds(full)
    assert part.validity.mass == (spec.masses()[0], spec.masses()[-1])
    for bad in ("1.1", "2..1", "a..b", "-1..2"):
        with pytest.raises(ConfigError, match="grid_mass"):
            TrackGridRelation().configure(grid_mass=bad)
    with pytest.raises(ConfigError, match="no option 'grid_size'"):
        TrackGridRelation().configure(grid_size="3")


def test_a_grid_file_of_another_opacity_law_is_refused(registry, small_track_grid):
    from radwalk.errors import ConfigError

    stages = StageSet.build(registry, {**NAMES, "opacity": "kramers"}, {"track-grid": {"grid": small_track_grid}})
    with pytest.raises(ConfigError, match=r"was built with opacity 'combined'.*this run's 'kramers' .* differs in "
                                          r"the law, the law's class"):
        stages.predict(_values(stages, [1.0], [0.014], [1.0]))


def test_stored_profiles_agree_with_the_solved_star(stages, grid, profile_error):
    # The bands come from the grid's stored profiles; the solved star at the same (M, Z, age) is the truth.  At
    # a track's own mass and Z only the phase is interpolated (profiles 0.04 of the life apart, linear between
    # them), so through the interior (r/R <= 0.95) they must agree to far better than the bands' widths:
    # measured 0.001 dex at most (mean free path, r/R 0.85), against 0.05-0.1 dex between neighbouring tracks
    # of this grid, which a profile of the wrong star, phase or unit would show.  Between tracks the error is
    # the linear interpolation's (docs/physics.md, measured on the shipped grid).
    v = _values(stages, [10.0 ** grid.log_mass[1]], [0.01], [4.0])
    worst = profile_error(stages, v)["all"]
    assert max(e for e, _ in worst.values()) < 0.005, worst
    r_rel, fields = stages.quick_bands(v)
    _, tr = stages.structure(v, [np.nan], [np.nan])
    # the whole star's diffusion time is the scalar the grid reports (the same integral, to the surface)
    assert fields["diffusion_time_cumulative"][0, -1] == pytest.approx(
        stages.quick_quantities(v)["diffusion_time"][0], rel=1e-3)
    assert fields["mass"][0, 0] == 0.0 and fields["mass"][0, -1] == pytest.approx(1.0, abs=1e-6)
    # the convective envelope: where the solved star is convective, so is the profile (but at the zone's edge)
    base = tr.scalars["convective_envelope_base_radius"][0]
    conv = fields["convective"][0]
    assert np.all(conv[(r_rel > base + 0.03) & (r_rel < 0.99)] == 1.0)
    assert np.all(conv[(r_rel < base - 0.03) & (r_rel > 0.2)] == 0.0)


def test_profiles_outside_the_grid_are_nan_and_do_not_borrow_from_failed_neighbours(stages):
    v = _values(stages, [1.0, 3.0], [0.014, 0.014], [4.0, 0.1])
    _, fields = stages.quick_bands(v)
    assert np.isfinite(fields["rho"][0]).all() and np.isnan(fields["rho"][1]).all()
