"""Per-star inference: recovery, calibration, convergence, determinism, a real binary (issue 3)."""

from concurrent.futures import ProcessPoolExecutor

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.fit import fit_one, stages_for
from radwalk.inference.posterior import Posterior
from radwalk.inference.sampler import run_chain
from radwalk.inference.star import Star, seed_for

# The default stages (the shipped track grid: mass, Z and age sampled, X by the grid's rule).  Two band stars:
# the profile bands are not checked here, and each band star is a solved star (~2 s of CPU).
BANDS = {"band_stars": 2}
FAST = RunConfig(settings=BANDS, sampler=SamplerConfig(walkers=16, chunk=200, max_steps=1400, derived_samples=100,
                                                       optimizer_starts=2))
REL_ERR = {"radius": 0.03, "luminosity": 0.05, "teff": 0.015}
# Model errors (the likelihood's floor_*) of the tests below that are about the sampler and the posterior, not
# about the model's error: the likelihood's defaults before they were sized from the model's measured misses
# (docs/likelihood.md).
NARROW_FLOORS = {"floor_radius": 0.03, "floor_luminosity": 0.05, "floor_teff": 0.01}


def with_age(stages, mass, Z, phase):
    """The truth of a star a fraction ``phase`` through the life its age prior allows (min(t_MS, 13.8 Gyr))."""
    v = stages.defaults()
    v.update(mass=np.array([mass]), Z=np.array([Z]), age=np.array([0.0]))
    life = stages.quick_quantities({**v, "X": stages.hydrogen_fraction(v)})["main_sequence_lifetime"][0]
    return {"mass": mass, "Z": Z, "age": phase * min(life, 13.8)}


def synthetic(config, truth, rng, name="syn"):
    """A star observed from the model itself, noise drawn with the likelihood's own total sigma."""
    stages = stages_for(config)
    v = stages.defaults()
    v.update({key: np.array([val]) for key, val in truth.items()})
    if stages.hydrogen_stage() is not None:  # X by the model's composition rule
        v["X"] = stages.hydrogen_fraction(v)
    pred = stages.predict(v)
    floors = {p.name: p.default for p in stages.likelihood.params}
    floors.update({key: v for key, v in config.settings.items() if key.startswith("floor_")})
    obs = {}
    for key, f in (("radius", k.R_SUN), ("luminosity", k.L_SUN), ("teff", 1.0)):
        value = pred[key][0] / f
        err = REL_ERR[key] * value
        sigma = np.hypot(err, floors[f"floor_{key}"] * value)
        obs[key] = value + sigma * rng.standard_normal()
        obs[f"{key}_err"] = err
    return Star.from_user_units(name, **obs)


def test_recovery_truth_inside_95(rng):
    # Four synthetic stars, three parameters each (mass, Z, age): every truth should sit inside its 95 %
    # interval; with 12 independent intervals two misses still happen 2 % of the time, three or more do not.
    cfg = RunConfig(sampler=SamplerConfig(walkers=24, max_steps=4000, derived_samples=100, optimizer_starts=2),
                    settings={**NARROW_FLOORS, **BANDS})
    stages = stages_for(cfg)
    truths = [with_age(stages, 0.9, 0.012, 0.5), with_age(stages, 3.0, 0.02, 0.3),
              with_age(stages, 1.5, 0.005, 0.7), with_age(stages, 6.0, 0.03, 0.5)]
    misses = []
    for i, truth in enumerate(truths):
        star = synthetic(cfg, truth, rng, f"rec{i}")
        summary, products = fit_one(star, cfg, seed_for(7, star.id))
        post = summary["parameters"]
        names = list(post)
        for name in ("mass", "Z", "age"):
            lo, hi = np.percentile(products.samples[:, names.index(name)], [2.5, 97.5])
            if not lo <= truth[name] <= hi:
                misses.append((i, name, truth[name], lo, hi))
        # The mass is data-dominated (bound set for NARROW_FLOORS, with which the noise is drawn too).
        assert post["mass"]["constrained"]
        assert abs(post["mass"]["p50"] / truth["mass"] - 1) < 0.15
    assert len(misses) <= 2, misses


def _coverage_one(i):
    # Simulation-based calibration: the truth is a draw from the fit's own prior (the declared priors inside
    # the grid's support, with the age uniform up to each mass's lifetime), the data from the model with the
    # likelihood's own noise.
    rng = np.random.default_rng([2026, i])
    cfg = FAST.with_changes(settings={**NARROW_FLOORS, **BANDS})
    stages = stages_for(cfg)
    prior = Posterior(stages, Star.from_user_units("prior", 1.0, 0.1, 1.0, 0.1, None, None).observations(), cfg)
    truth = dict(zip(prior.names, prior.sample_prior(rng, 1)[0]))
    star = synthetic(cfg, truth, rng, f"cal{i}")
    post = Posterior(stages, star.observations(), cfg)
    chain = run_chain(post, cfg.sampler, seed_for(11, star.id))
    flat, _ = chain.flat()
    inside = []
    for j, name in enumerate(post.names):
        lo, hi = np.percentile(flat[:, j], [16, 84])
        inside.append(bool(lo <= truth[name] <= hi))
    return inside


@pytest.mark.slow  # 40 fits: about 4 minutes on 2 idle cores (measured 0.750 over 120 intervals, 2 December 2026)
def test_calibration_68_percent_coverage():
    # Simulation-based coverage: truths from the priors, data from the model with its own noise.  The
    # fraction of truths inside the 68 % intervals must be 0.68 within two binomial standard errors.
    n_stars = 40
    with ProcessPoolExecutor(max_workers=2) as pool:
        results = list(pool.map(_coverage_one, range(n_stars)))
    hits = np.array(results)  # [stars, params]
    frac = hits.mean()
    se = np.sqrt(0.68 * 0.32 / hits.size)
    print(f"coverage {frac:.3f} over {hits.size} intervals (binomial s.e. {se:.3f}); per parameter "
          f"{hits.mean(axis=0)}")
    assert abs(frac - 0.68) < 2 * se


def test_short_chain_is_flagged_not_converged():
    cfg = RunConfig(settings=BANDS, sampler=SamplerConfig(walkers=16, chunk=100, max_steps=200, derived_samples=50,
                                                          optimizer_starts=1))
    star = Star.from_user_units("short", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    summary, products = fit_one(star, cfg, seed_for(1, star.id))
    s = summary["sampler"]
    assert s["converged"] is False
    assert "max_steps = 200" in s["reason"] and "tau" in s["reason"]
    assert any(w.startswith("not converged") for w in summary["warnings"])


def test_normal_run_passes_50_tau():
    cfg = RunConfig(settings=BANDS, sampler=SamplerConfig(derived_samples=200))
    star = Star.from_user_units("normal", 1.3, 0.03, 2.5, 0.12, None, None)
    summary, _ = fit_one(star, cfg, seed_for(1, star.id))
    s = summary["sampler"]
    assert s["converged"] is True and s["reason"] == ""
    assert s["steps"] > 50 * s["tau_max"]
    assert all(np.isfinite(p["tau"]) for p in summary["parameters"].values() if not p["drawn_from_prior"])


def test_same_seed_identical_different_seed_different():
    star = Star.from_user_units("det", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    cfg = RunConfig(settings=BANDS, sampler=SamplerConfig(walkers=16, chunk=100, max_steps=300, derived_samples=50,
                                                          optimizer_starts=2))
    _, a = fit_one(star, cfg, seed_for(5, star.id))
    _, b = fit_one(star, cfg, seed_for(5, star.id))
    _, c = fit_one(star, cfg, seed_for(6, star.id))
    assert np.array_equal(a.chain.chain, b.chain.chain)
    assert np.array_equal(a.samples, b.samples)
    assert not np.array_equal(a.chain.chain, c.chain.chain)


def test_per_star_seed_depends_on_id_not_order():
    s1 = seed_for(3, "alpha").generate_state(4)
    s2 = seed_for(3, "alpha").generate_state(4)
    s3 = seed_for(3, "beta").generate_state(4)
    assert np.array_equal(s1, s2) and not np.array_equal(s1, s3)


# Systematic error of the track grid's masses for main-sequence stars, stated in docs/likelihood.md: the medians
# of 16 main-sequence stars with dynamical masses fall 3-16 % low.
MASS_SYSTEMATIC = 0.16


@pytest.mark.parametrize(
    "name,R,dR,L,dL,T,dT,feh,mass",
    [
        # alpha Cen A and B, astrometric-orbit masses M_A = 1.1055 +/- 0.0039, M_B = 0.9373 +/- 0.0033
        # (Kervella et al. 2016, A&A 594, A107), interferometric radii R_A = 1.2234 +/- 0.0053,
        # R_B = 0.8632 +/- 0.0037 R_sun (same paper); L_A = 1.521, L_B = 0.503 L_sun, T_eff 5795 K and
        # 5214 K, [Fe/H] ~ +0.22 and +0.24 (values from memory of that paper and its sources).
        ("alpha Cen A", 1.2234, 0.0053, 1.521, 0.015, 5795.0, 19.0, 0.22, 1.1055),
        ("alpha Cen B", 0.8632, 0.0037, 0.503, 0.007, 5214.0, 33.0, 0.24, 0.9373),
    ],
)
def test_real_star_with_dynamical_mass(name, R, dR, L, dL, T, dT, feh, mass):
    star = Star.from_user_units(name, R, dR, L, dL, T, dT, feh=feh, feh_err=0.05)
    summary, products = fit_one(star, RunConfig(settings=BANDS, sampler=SamplerConfig(derived_samples=200)),
                                seed_for(1, star.id))
    m = summary["parameters"]["mass"]
    lo, hi = np.percentile(products.samples[:, list(summary["parameters"]).index("mass")], [2.5, 97.5])
    print(name, "posterior mass", m["p16"], m["p50"], m["p84"], "95 %", lo, hi, "measured", mass)
    assert lo <= mass <= hi
    assert abs(m["p50"] - mass) / mass < MASS_SYSTEMATIC


def test_late_main_sequence_star_is_fitted_with_its_age():
    # AI Phe A: M = 1.1938 +/- 0.0008 M_sun, R = 1.8050 +/- 0.0022 R_sun (Maxted et al. 2020,
    # arXiv:2003.09295), T_eff = 6199 +/- 22 K (Miller, Maxted & Smalley 2020, arXiv:2004.04568): near the end
    # of its main sequence.  The zero-age relations refused it; the track grid reaches it with an age.
    R, dR, T, dT = 1.8050, 0.0022, 6199.0, 22.0
    L = R**2 * (T / 5772.0) ** 4  # IAU 2015 nominal Sun
    dL = L * np.hypot(2 * dR / R, 4 * dT / T)
    star = Star.from_user_units("AI Phe A", R, dR, L, dL, T, dT)
    summary, products = fit_one(star, FAST.with_changes(sampler=SamplerConfig(derived_samples=100)),
                                seed_for(1, star.id))
    names = list(summary["parameters"])
    lo, hi = np.percentile(products.samples[:, names.index("mass")], [2.5, 97.5])
    m = summary["parameters"]["mass"]
    print("AI Phe A posterior mass", m["p16"], m["p50"], m["p84"], "95 %", lo, hi, "measured 1.1938")
    assert lo <= 1.1938 <= hi
    age, life = summary["parameters"]["age"]["p50"], summary["derived"]["main_sequence_lifetime"]["p50"]
    assert age > 0.5 * life  # well into its main sequence


def test_plugin_adds_a_derived_quantity(tmp_path):
    # The radwalk_derived_quantities hook: a plugin file adds the ratio of the Kelvin-Helmholtz to the
    # photon diffusion time, which then appears in the summary with its unit.
    p = tmp_path / "ratio.py"
    p.write_text(
        "from radwalk.host.hookspecs import hookimpl\n"
        "@hookimpl\n"
        "def radwalk_derived_quantities(profile, opacity, quantities):\n"
        "    r = quantities['kelvin_helmholtz_time'] / quantities['diffusion_time']\n"
        "    return {'kh_over_diffusion': (r, '', 'Kelvin-Helmholtz over diffusion time')}\n"
    )
    cfg = FAST.with_changes(plugins=(str(p),))
    star = Star.from_user_units("derived", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    summary, _ = fit_one(star, cfg, seed_for(1, star.id))
    d = summary["derived"]
    assert "kh_over_diffusion" in d
    expected = d["kelvin_helmholtz_time"]["p50"] / d["diffusion_time"]["p50"]
    assert 0.3 < d["kh_over_diffusion"]["p50"] / expected < 3
