"""Main-sequence evolution and the solar calibration against published lifetimes, the standard solar model
and helioseismology.

External check values:
* Hydrogen-burning lifetimes at Z = 0.020 with 0.2 H_P core overshoot: 2 M_sun ~1.16 Gyr, 5 M_sun ~94 Myr;
  1 M_sun ~10 Gyr (Schaller, Schaerer, Meynet & Maeder 1992, A&AS 96, 269; from memory, to ~5 %).
  Published grids with comparable physics differ by ~10 % (opacities, overshoot definitions; common
  practice, no source), so 15 % is asked.
* Standard solar model (Bahcall, Serenelli & Basu 2005, ApJ 621, L85; from memory): T_c = 15.7e6 K,
  rho_c ~150 g/cm^3, initial Y ~0.27, envelope base 0.713-0.715 R.  Models with and without element
  diffusion and with different abundance sets span ~1.5 % in T_c and ~3 % in rho_c (from memory), so 2 %
  and 5 % are asked; without diffusion the envelope base sits ~0.01 R higher (from memory), so 0.015 R.
* Helioseismology: envelope base 0.713 +- 0.003 R (Christensen-Dalsgaard, Gough & Thompson 1991, ApJ 378,
  413; from memory).
* IAU 2015 Resolution B3 nominal L_sun and R_sun (radwalk.constants): the calibration's targets, to 0.1 %.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from radwalk import constants as const
from radwalk.errors import ConfigError
from radwalk.physics.nuclear import A_H, E_CNO_CYCLE, E_PPI
from radwalk.physics.opacity import default_kappa
from radwalk.physics.structure.calibration import (
    CALIBRATED_ALPHA,
    CALIBRATED_Y0,
    SOLAR_AGE,
    calibrate_sun,
    composition_from_helium,
)
from radwalk.physics.structure.evolution import evolve, mix, mixed_zones

MSUN = const.M_SUN
GYR = 1e9 * const.YEAR
X, Z = 0.70, 0.02


# --------------------------------------------------------------------------- fixtures (each track once)
def _timed(M, **kwargs):
    return evolve(M * MSUN, X, Z, default_kappa, **kwargs)  # records its own CPU time


@pytest.fixture(scope="module")
def sun_like():
    """1 M_sun at X = 0.70, Z = 0.02 (no convective core: no overshoot to choose)."""
    return _timed(1.0)


@pytest.fixture(scope="module")
def two():
    return _timed(2.0, alpha_ov=0.2)


@pytest.fixture(scope="module")
def five():
    return _timed(5.0, alpha_ov=0.2)


@pytest.fixture(scope="module")
def sun():
    """The calibrated Sun, started from the stored calibration (the slow test starts far from it)."""
    return calibrate_sun()


# --------------------------------------------------------------------------- mixing
def test_mixing_conserves_hydrogen_and_flattens_zones():
    w = np.array([0.5, 1.0, 1.0, 2.0, 1.0, 0.5])
    x = np.array([0.2, 0.3, 0.4, 0.6, 0.7, 0.7])
    out = mix(x, w, [(0, 2), (4, 5)])
    assert np.dot(w, out) == pytest.approx(np.dot(w, x), rel=1e-14)
    assert np.all(out[:3] == out[0]) and out[3] == 0.6
    assert out[0] == pytest.approx((0.1 + 0.3 + 0.4) / 2.5)


def test_overshoot_extends_only_the_core(two):
    zams = two.models[0]
    plain = mixed_zones(zams, 0.0)
    over = mixed_zones(zams, 0.2)
    assert plain[0][0] == 0 and over[0][0] == 0
    assert over[0][1] > plain[0][1]
    assert two.q_mixed[0] > two.q_cc[0] > 0.0
    assert over[1:] == plain[1:]  # the thin surface ionisation zone is left alone


def test_refuses_bad_step_control():
    with pytest.raises(ConfigError, match="dXc"):
        evolve(MSUN, X, Z, default_kappa, dXc=0.2)
    with pytest.raises(ConfigError, match="alpha_ov"):
        evolve(MSUN, X, Z, default_kappa, alpha_ov=-0.1)


# --------------------------------------------------------------------------- tracks
def test_tracks_end_at_central_hydrogen_exhaustion(sun_like, two, five):
    for track in (sun_like, two, five):
        assert track.stop_reason.startswith("central hydrogen exhausted")
        assert track.X_c[-1] <= 0.01 < track.X_c[-2]
        assert np.all(np.diff(track.age) > 0.0) and np.all(np.diff(track.X_c) < 0.0)
        # The step control: no step burns more than 0.02 at the centre (small overshoot of the corrector allowed).
        assert np.max(-np.diff(track.X_c)) < 0.022
        print(f"M = {track.M / MSUN:g}: {track.n_steps} models, {track.cpu_seconds:.1f} s CPU")


@pytest.mark.xfail(strict=True, reason="measured 13.6 Gyr, +36 % (the zero-age 1 M_sun model at Z = 0.02 is "
                                       "0.17 dex too faint, docs/physics.md)")
def test_lifetime_one_solar_mass(sun_like):
    # ~10 Gyr: Schaller et al. 1992 (from memory); 15 % as argued in the module docstring.
    assert sun_like.main_sequence_lifetime() / GYR == pytest.approx(10.0, rel=0.15)


@pytest.mark.parametrize("which, published", [("two", 1.16), ("five", 0.094)])
def test_lifetime_with_overshoot(which, published, request):
    # Schaller et al. 1992, Z = 0.020, 0.2 H_P overshoot (from memory); measured 1.00 and 0.085 Gyr.
    track = request.getfixturevalue(which)
    assert track.main_sequence_lifetime() / GYR == pytest.approx(published, rel=0.15)


def test_luminosity_rises_along_the_main_sequence(sun_like, two, five):
    for track in (sun_like, two, five):
        assert np.all(np.diff(track.L) > 0.0)
    # Only the order is asked: 1.3-3 times from zero age to exhaustion (common practice, no source).
    for track in (sun_like, two, five):
        assert 1.3 < track.L[-1] / track.L[0] < 3.0


def test_convective_core_of_two_solar_masses_shrinks(two):
    # Kippenhahn, Weigert & Weiss 2012, ch. 30: CNO-burning cores recede as the opacity (electron
    # scattering, ~1 + X) falls with X.  Early on the 2 M_sun core first grows a little (0.085 -> 0.089,
    # measured), while part of its energy still comes from the pp chain; from X_c ~ 0.6 on it shrinks.
    assert two.q_cc[0] > 0.05
    assert two.q_cc[-1] < 0.7 * two.q_cc[0]
    later = two.q_cc[two.X_c < 0.6]
    assert np.all(np.diff(later[::4]) < 0.0)


def test_energy_released_equals_hydrogen_burned(sun_like):
    """Integral of L_nuc dt equals the hydrogen burned times 25.0-26.2 MeV per 4 protons (CNO to ppI)."""
    track = sun_like
    L_nuc = track.L - track.L_grav
    energy = float(np.sum(0.5 * (L_nuc[1:] + L_nuc[:-1]) * np.diff(track.age)))
    last = track.models[-1]
    dm = np.diff(last.m)
    burned = float(np.sum(0.5 * ((track.X0 - last.X)[1:] + (track.X0 - last.X)[:-1]) * dm))
    per_gram = energy / burned
    unit = const.MEV / (4.0 * A_H * const.M_U)
    assert E_CNO_CYCLE * unit * 0.995 < per_gram < E_PPI * unit * 1.005


def test_time_step_convergence(five):
    # Halving the step changes the lifetime by 0.09 % at 1 M_sun (measured); ask < 0.3 % here.
    finer = _timed(5.0, alpha_ov=0.2, dXc=0.01)
    t1, t2 = five.main_sequence_lifetime(), finer.main_sequence_lifetime()
    print(f"5 M_sun lifetime {t1 / GYR * 1e3:.3f} Myr (dXc 0.02) vs {t2 / GYR * 1e3:.3f} Myr (0.01): "
          f"{t1 / t2 - 1:+.2e}; L at the end {five.L[-1] / finer.L[-1] - 1:+.2e}")
    assert t1 == pytest.approx(t2, rel=3e-3)
    mid = 0.5 * t2
    assert five.at_age(mid).L == pytest.approx(finer.at_age(mid).L, rel=1e-3)


def test_at_age_interpolates_between_steps(sun_like):
    track = sun_like
    k = track.n_steps // 2
    p = track.at_age(track.age[k])
    assert p.L == pytest.approx(track.L[k], rel=1e-12) and p.X_c == pytest.approx(track.X_c[k], rel=1e-12)
    q = track.at_age(0.5 * (track.age[k] + track.age[k + 1]))
    assert track.L[k] < q.L < track.L[k + 1]
    with pytest.raises(ConfigError, match="outside the track"):
        track.at_age(2.0 * track.age[-1])


# --------------------------------------------------------------------------- the calibrated Sun
def test_calibrated_sun_matches_nominal_L_and_R(sun):
    # IAU 2015 Resolution B3 nominal L_sun and R_sun: to 0.1 %.
    print(f"alpha_mlt = {sun.alpha_mlt:.4f}, Y0 = {sun.Y0:.4f}, X0 = {sun.X0:.4f}, Z0 = {sun.Z0:.5f}, "
          f"T_c = {sun.T_c:.4g} K, rho_c = {sun.rho_c:.4g}, X_c = {sun.X_c:.4f}, r_env = {sun.envelope_base:.4f}, "
          f"{sun.tracks} tracks, {sun.cpu_seconds:.1f} s CPU")
    assert abs(sun.L_error) < 1e-3 and abs(sun.R_error) < 1e-3
    assert sun.model.L_surface / const.L_SUN == pytest.approx(1.0, abs=1e-3)
    assert sun.model.R / const.R_SUN == pytest.approx(1.0, abs=1e-3)
    assert sun.track.age[-1] == pytest.approx(SOLAR_AGE, rel=1e-12)
    X0, Z0 = composition_from_helium(sun.Y0)
    assert Z0 / X0 == pytest.approx(0.0181, rel=1e-12)  # Asplund et al. 2009 (from memory)
    # No diffusion: the surface keeps the initial composition.
    assert sun.surface_Y == pytest.approx(sun.Y0, abs=1e-12)


def test_calibrated_sun_centre_against_standard_solar_model(sun):
    # BS05 (from memory): T_c = 15.7e6 K to 2 %, rho_c ~150 g/cm^3 to 5 % (module docstring).
    assert sun.T_c == pytest.approx(15.7e6, rel=0.02)
    assert sun.rho_c == pytest.approx(150.0, rel=0.05)
    # Central hydrogen of today's Sun ~0.34-0.36 in standard solar models (BS05, from memory).
    assert sun.X_c == pytest.approx(0.35, abs=0.03)


@pytest.mark.xfail(strict=True, reason="measured 0.776 R, +0.063 R: the default opacity is ~30 % below the "
                                       "standard solar model's near 2e6 K (13.6 against ~20 cm^2/g at 0.70 R)")
def test_calibrated_sun_envelope_base(sun):
    # Helioseismology 0.713 R (Christensen-Dalsgaard et al. 1991); +0.01 R without diffusion: 0.015 R.
    assert sun.envelope_base == pytest.approx(0.713, abs=0.015)


@pytest.mark.xfail(strict=True, reason="measured 3.6e4 yr, a factor 4.7 below: the default opacity of the "
                                       "radiative interior is too low (docs/physics.md)")
def test_calibrated_sun_photon_diffusion_time(sun):
    # Photon diffusion (random walk) time through the Sun ~1.7e5 yr (Mitalas & Sills 1992, ApJ 401, 759; from
    # memory); a factor 3 either way (the spread of published estimates, common practice, no source).
    t = sun.model.photon_diffusion_time() / const.YEAR
    print(f"calibrated Sun: photon diffusion time {t:.3g} yr (Mitalas & Sills 1992: 1.7e5 yr)")
    assert 1.7e5 / 3 < t < 1.7e5 * 3


@pytest.mark.xfail(strict=True, reason="measured Y0 = 0.296 and alpha_mlt = 1.16: the model is too faint at "
                                       "a given helium (and the envelope opacity too low), both absorbed here")
def test_calibrated_sun_helium_and_mixing_length(sun):
    # Initial Y of standard solar models 0.26-0.28 (BS05 and others, from memory); alpha_mlt of the
    # Boehm-Vitense form in solar calibrations 1.6-2.2 (common practice, no source).
    assert sun.Y0 == pytest.approx(0.27, abs=0.01)
    assert 1.6 < sun.alpha_mlt < 2.2


# --------------------------------------------------------------------------- slow: the costlier checks
@pytest.mark.slow
def test_calibration_from_a_distant_start(sun):
    far = calibrate_sun(alpha_mlt=1.8, Y0=0.27)
    print(f"{far.iterations} iterations, {far.tracks} tracks, {far.cpu_seconds:.1f} s CPU")
    assert far.iterations <= 6
    assert far.alpha_mlt == pytest.approx(CALIBRATED_ALPHA, abs=2e-3)
    assert far.Y0 == pytest.approx(CALIBRATED_Y0, abs=2e-4)
    assert far.alpha_mlt == pytest.approx(sun.alpha_mlt, abs=2e-3)


@pytest.mark.slow
def test_gravothermal_term_and_mesh_are_small(sun):
    X0, Z0 = composition_from_helium(sun.Y0)
    kw = dict(alpha_mlt=sun.alpha_mlt, age_end=SOLAR_AGE)
    cold = evolve(MSUN, X0, Z0, default_kappa, gravothermal=False, **kw)
    fine = evolve(MSUN, X0, Z0, default_kappa, n_mesh=800, **kw)
    L, R = sun.model.L_surface, sun.model.R
    # Measured: the gravothermal term 1.5e-4 in L; 800 against 400 points 9.7e-4 in L and 7.9e-4 in R at
    # 4.57 Gyr (5e-4 and 8e-4 on the zero-age sequence, docs/physics.md).
    assert abs(cold.L[-1] / L - 1.0) < 5e-4
    assert abs(fine.L[-1] / L - 1.0) < 2e-3 and abs(fine.R[-1] / R - 1.0) < 2e-3
    assert abs(sun.track.L_grav[-1] / L) < 1e-3
    assert math.isfinite(fine.T_c[-1]) and fine.T_c[-1] == pytest.approx(sun.T_c, rel=1e-3)
