"""The likelihoods' model-error term and the treatment of a luminosity derived from R and T_eff."""

import math
import re
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from radwalk import constants as k
from radwalk.errors import ConfigError
from radwalk.host.components import OBSERVABLES, Observations
from radwalk.host.config import RunConfig
from radwalk.host.params import Prior
from radwalk.inference.fit import stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.star import Star
from radwalk.plugins import likelihoods as lk

DOC = Path(__file__).resolve().parents[2] / "docs" / "likelihood.md"
# Named stages with the sampled parameters mass, X, Z: the likelihood does not depend on the model behind it
QUICK = RunConfig(stages={"profile": "polytrope", "relation": "homology"})


def test_default_floors_are_the_model_error_budget():
    for lik in (lk.Gaussian(), lk.StudentT()):
        declared = {p.name: p for p in lik.params}
        for key in OBSERVABLES:
            p = declared[f"floor_{key}"]
            assert p.default == lk.MODEL_ERROR[key] and not p.sampled
        assert set(lik.fixed_params) == {f"floor_{key}" for key in OBSERVABLES}
    # the budget is the rms physics miss and the interpolation error in quadrature, in dex, times ln 10
    misses = lk.physics_misses()
    for key in OBSERVABLES:
        rms = math.sqrt(float(np.mean(misses[key] ** 2)))
        assert lk.MODEL_ERROR[key] == round(math.log(10) * math.hypot(rms, lk.INTERPOLATION_CHECKS[key]), 3)


def test_physics_misses_are_those_of_the_documented_zams_table():
    # docs/physics.md, zero-age main sequence against Tout et al. (1996): Delta log L at 0.8, 1, 1.2, 1.5, 2,
    # 3, 5 M_sun as printed there (three decimals; the table's L and R are rounded, hence 0.002)
    printed = [-0.178, -0.166, -0.135, -0.071, -0.025, +0.006, +0.030]
    assert np.allclose(lk.physics_misses()["luminosity"], printed, atol=0.002)
    # T_eff's miss obeys L = 4 pi R^2 sigma T^4: the model's and the published T_eff from their own L and R
    for row, dt in zip(lk.MODEL_CHECKS, lk.physics_misses()["teff"]):
        _, lm, rm, lp, rp = row
        teff = [(lum * k.L_SUN / (4 * np.pi * (r * k.R_SUN) ** 2 * k.SIGMA_SB)) ** 0.25 for lum, r in ((lm, rm),
                                                                                                  (lp, rp))]
        assert dt == pytest.approx(np.log10(teff[0] / teff[1]), abs=1e-12)


def test_documented_sizes_match_the_code():
    rows = {}
    for line in DOC.read_text(encoding="utf-8").splitlines():
        m = re.match(r"\|\s*(radius|luminosity|teff)\s*\|([^|]+)\|([^|]+)\|([^|]+)\|([^|]+)\|", line)
        if m:
            rows[m.group(1)] = [float(x) for x in m.groups()[1:]]
    assert set(rows) == set(OBSERVABLES)
    dex = lk.model_error_dex()
    for key, (phys, interp, total, f) in rows.items():
        assert phys == pytest.approx(math.sqrt(float(np.mean(lk.physics_misses()[key] ** 2))), abs=5e-5)
        assert interp == pytest.approx(lk.INTERPOLATION_CHECKS[key], abs=5e-5)
        assert total == pytest.approx(dex[key], abs=5e-5)
        assert f == lk.MODEL_ERROR[key]


def _obs(values, errors):
    return Observations(dict(zip(OBSERVABLES, values)), dict(zip(OBSERVABLES, errors)))


def test_gaussian_is_the_normal_density_with_errors_in_quadrature():
    # reference: scipy.stats.norm with scale sqrt(err^2 + (f x)^2)
    obs = _obs((7.0e10, 4.0e33, 5800.0), (7.0e8, 1.0e32, 50.0))
    pred = {"radius": np.array([6.9e10, 7.5e10]), "luminosity": np.array([4.2e33, 3.0e33]),
            "teff": np.array([5750.0, 6000.0])}
    ll = lk.Gaussian().loglike(pred, obs)
    want = np.zeros(2)
    for key in OBSERVABLES:
        v, e = obs.values[key], obs.errors[key]
        want += stats.norm.logpdf(pred[key], loc=v, scale=math.hypot(e, lk.MODEL_ERROR[key] * v))
    # the likelihood drops the constant -1/2 log(2 pi) per observable
    assert ll == pytest.approx(want + 1.5 * math.log(2 * math.pi), rel=1e-12)


def test_student_t_is_scipys_t_with_the_same_scale():
    obs = _obs((7.0e10, np.nan, 5800.0), (7.0e8, np.nan, 50.0))
    pred = {"radius": np.array([6.0e10]), "luminosity": np.array([1.0e33]), "teff": np.array([6400.0])}
    ll = lk.StudentT().loglike(pred, obs, nu=3.0)
    want = sum(stats.t.logpdf(pred[key], df=3.0, loc=obs.values[key],
                              scale=math.hypot(obs.errors[key], lk.MODEL_ERROR[key] * obs.values[key]))
               for key in ("radius", "teff"))
    assert ll == pytest.approx(want, rel=1e-12)


def test_tiny_measurement_error_leaves_the_model_error():
    obs = _obs((1.0, np.nan, np.nan), (1e-9, np.nan, np.nan))
    f = lk.MODEL_ERROR["radius"]
    ll = lk.Gaussian().loglike({"radius": np.array([1.0 + f]), "luminosity": np.array([1.0]),
                                "teff": np.array([1.0])}, obs)
    assert ll[0] == pytest.approx(-0.5 - math.log(f), rel=1e-6)


def test_a_prior_on_a_model_error_is_refused_a_fixed_value_is_not():
    stages = stages_for(QUICK)
    star = Star.from_user_units("s", 1.0, 0.02, 1.0, 0.05, 5772.0, 60.0)
    cfg = QUICK.with_changes(priors={"floor_luminosity": Prior("uniform", 0.0, 0.5)})
    with pytest.raises(ConfigError, match="floor_luminosity.*fixed setting.*cannot be sampled"):
        Posterior(stages, star.observations(), cfg)
    post = Posterior(stages, star.observations(), QUICK.with_changes(settings={"floor_luminosity": 0.5}))
    assert post.fixed["floor_luminosity"] == 0.5 and "floor_luminosity" not in post.names


def _sun_like(derived, luminosity=True, radius=True):
    # L = R^2 (T/T_sun)^4 in solar units: a luminosity computed from the row's own R and T_eff
    R, T = 1.10, 5900.0
    L = R**2 * (T / 5772.0) ** 4
    return Star.from_user_units("tied", R if radius else None, 0.01 if radius else None,
                                L if luminosity else None, 0.03 * L if luminosity else None, T, 40.0,
                                luminosity_derived=derived)


def test_a_derived_luminosity_leaves_the_likelihood():
    stages = stages_for(QUICK)
    derived, measured, without = _sun_like(True), _sun_like(False), _sun_like(False, luminosity=False)
    assert not derived.luminosity_used and measured.luminosity_used
    assert np.isnan(derived.observations().values["luminosity"])
    assert derived.user_values()["luminosity"] == measured.user_values()["luminosity"]  # kept in the record
    theta = np.array([[1.05, 0.70, 0.015], [1.2, 0.72, 0.02]])  # mass, X, Z
    lls = [Posterior(stages, s.observations(), QUICK).log_likelihood(theta) for s in (derived, measured,
                                                                                             without)]
    assert np.array_equal(lls[0], lls[2]) and not np.allclose(lls[0], lls[1])
    assert "left out of the likelihood" in derived.luminosity_note()


def test_a_derived_luminosity_is_kept_when_the_radius_is_missing():
    star = _sun_like(True, radius=False)
    assert star.luminosity_used
    assert np.isfinite(star.observations().values["luminosity"])
    assert "kept in the likelihood" in star.luminosity_note()
