"""The Sun fitted as a catalog star with the default stages (the shipped track grid): age and centre.

The Sun's own numbers go in as a well-measured star would: R = 1 +- 0.01 R_sun and L = 1 +- 0.02 L_sun (the
IAU 2015 nominal values, Resolution B3, define the units), T_eff 5772 +- 20 K (IAU 2015 nominal T_eff; the error
is a typical spectroscopic one, common practice, no source) and [Fe/H] 0 +- 0.05 dex.  What comes out is
compared with the standard solar model of Bahcall, Serenelli & Basu (2005, ApJ 621, L85; BS05): T_c 15.7e6 K and
rho_c 150 g/cm^3 (from memory), and with the meteoritic age 4.567 Gyr (Amelin et al. 2002, Science 297, 1678;
from memory).  Inside the 68 % interval is the test: the posterior is what the data allow, and L and T_eff to
2 % and 0.3 % leave the age of a 1 M_sun star uncertain by gigayears (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.fit import fit_one
from radwalk.inference.star import Star, seed_for

BS05_TC, BS05_RHOC = 15.7e6, 150.0  # K, g/cm^3 (Bahcall, Serenelli & Basu 2005; from memory)
SOLAR_AGE_GYR = 4.567  # Amelin et al. (2002), meteoritic (from memory)


@pytest.fixture(scope="module")
def sun_fit():
    star = Star.from_user_units("Sun", radius=1.0, radius_err=0.01, luminosity=1.0, luminosity_err=0.02,
                                teff=5772.0, teff_err=20.0, feh=0.0, feh_err=0.05)
    # Default stages and priors; two band stars (the bands are not checked here, and each costs a solved star).
    cfg = RunConfig(settings={"band_stars": 2},
                    sampler=SamplerConfig(walkers=32, chunk=400, max_steps=8000, derived_samples=400,
                                          optimizer_starts=3))
    summary, _ = fit_one(star, cfg, seed_for(2, star.id))
    return summary


def _interval(summary, name, level=(16, 84)):
    block = summary["parameters"].get(name) or summary["derived"][name]
    return block[f"p{level[0]}"], block["p50"], block[f"p{level[1]}"]


def test_the_default_model_is_the_track_grid(sun_fit):
    assert sun_fit["stages"]["relation"] == "track-grid" and sun_fit["stages"]["profile"] == "track-grid"
    assert sun_fit["sampler"]["converged"]


def test_sun_mass_and_age(sun_fit):
    lo, mid, hi = _interval(sun_fit, "mass")
    print(f"\nSun: mass {lo:.3f} / {mid:.3f} / {hi:.3f} M_sun (p16/p50/p84)")
    assert lo <= 1.0 <= hi
    lo, mid, hi = _interval(sun_fit, "age")
    print(f"Sun: age {lo:.2f} / {mid:.2f} / {hi:.2f} Gyr (meteoritic {SOLAR_AGE_GYR})")
    assert lo <= SOLAR_AGE_GYR <= hi


def test_sun_centre_against_the_standard_solar_model(sun_fit):
    lo, mid, hi = _interval(sun_fit, "central_temperature")
    print(f"\nSun: T_c {lo:.3e} / {mid:.3e} / {hi:.3e} K (BS05 {BS05_TC:.3e})")
    assert lo <= BS05_TC <= hi
    lo, mid, hi = _interval(sun_fit, "central_density")
    print(f"Sun: rho_c {lo:.1f} / {mid:.1f} / {hi:.1f} g/cm^3 (BS05 {BS05_RHOC})")
    assert lo <= BS05_RHOC <= hi
    assert np.isfinite(_interval(sun_fit, "main_sequence_lifetime")[1])
