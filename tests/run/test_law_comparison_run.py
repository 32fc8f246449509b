"""A catalog run comparing two opacity laws, one of which cannot fit one star: the failing law is named in the
star's summary.json and in the run log, and the other law's fit of that star is kept (law_run.py)."""

from __future__ import annotations

import json
import math

import pytest
from law_run import FAILING_LAW, FAILING_STAR, LAWS, STARS, tenth_law_config, two_law_run

from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.results.layout import star_folder
from radwalk.run.star_figures import stored_products


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return two_law_run(tmp_path_factory)


def summary(out, star_id) -> dict:
    return json.loads((star_folder(out, star_id) / "summary.json").read_text())


def test_the_failing_law_is_named_and_the_other_fit_of_the_star_kept(run):
    out, _ = run
    assert [summary(out, s)["status"] != "failed" for s in STARS] == [True] * len(STARS)  # each has a fit
    doc = summary(out, FAILING_STAR)
    assert doc["status"] in ("ok", "not-converged") and doc["opacity"] == LAWS[0]
    assert math.isfinite(doc["parameters"]["mass"]["p50"])
    assert math.isfinite(doc["derived"]["diffusion_time"]["p50"])
    failed = doc["comparison"][FAILING_LAW]
    assert failed["status"] == "failed"
    assert failed["reason"].startswith(f"opacity law {FAILING_LAW!r} failed: ")
    assert "R = 1.3 R_sun" in failed["reason"]  # the observable no model of that law reaches
    assert "parameters" not in failed
    kept = doc["comparison"][LAWS[0]]
    assert kept["status"] == doc["status"] and kept["parameters"]["mass"] == doc["parameters"]["mass"]
    assert any(w.startswith(f"opacity law {FAILING_LAW!r} failed") for w in doc["warnings"])
    # the failed law leaves no chain file; the kept law's chain is the star's chain.h5
    folder = star_folder(out, FAILING_STAR)
    assert (folder / "chain.h5").is_file() and not list(folder.glob("chain-*"))
    assert not list(folder.glob("*.partial*"))


def test_both_laws_fitted_the_other_star(run):
    out, _ = run
    (other,) = [s for s in STARS if s != FAILING_STAR]
    doc = summary(out, other)
    assert [c["status"] != "failed" for c in doc["comparison"].values()] == [True, True]
    masses = [doc["comparison"][law]["parameters"]["mass"]["p50"] for law in LAWS]
    # 10x less opaque: the homology relation L ~ mu^4 M^3 / kappa (Kippenhahn, Weigert & Weiss 2012, ch. 20)
    # needs less mass for the same luminosity
    assert masses[1] < masses[0]
    assert (star_folder(out, other) / f"chain-{FAILING_LAW}.h5").is_file()


def test_the_run_log_names_the_failing_law(run):
    out, _ = run
    lines = [ln for ln in (out / "radwalk.log").read_text().splitlines() if f"star {FAILING_STAR!r}" in ln]
    assert len(lines) == 1
    assert f"opacity law {FAILING_LAW!r} failed: no model within the priors reaches R = 1.3 R_sun" in lines[0]


def test_when_the_first_law_fails_the_next_law_gives_the_star_its_results(tmp_path):
    config = tenth_law_config(tmp_path, laws=(FAILING_LAW, LAWS[0]))
    r, r_err, lum, lum_err, teff, teff_err = STARS[FAILING_STAR]
    star = Star.from_user_units(FAILING_STAR, r, r_err, lum, lum_err, teff, teff_err)
    folder = tmp_path / "star"
    folder.mkdir()
    result = fit_star(star, config, outdir=folder, plots=False)
    assert result.status != "failed", result.reason
    doc = json.loads((folder / "summary.json").read_text())
    assert doc["opacity"] == LAWS[0] and list(doc["comparison"]) == [FAILING_LAW, LAWS[0]]
    assert doc["comparison"][FAILING_LAW]["status"] == "failed"
    assert doc["warnings"][0].startswith(f"opacity law {FAILING_LAW!r} failed: ")
    assert doc["warnings"][0].endswith(f"(the star's results are those of {LAWS[0]!r})")
    # the run's first law has no chain; the law that fitted keeps its own chain file, and the stored star's
    # products (what its figures are drawn from) are that law's alone
    assert not (folder / "chain.h5").exists() and (folder / f"chain-{LAWS[0]}.h5").is_file()
    products = stored_products(star, config, folder)
    assert list(products) == [LAWS[0]]
    assert products[LAWS[0]].derived["diffusion_time"].size == doc["sampler"]["derived_samples"]


def test_a_star_no_law_fits_is_failed_naming_each_law(tmp_path):
    config = tenth_law_config(tmp_path)
    # R = 3 R_sun at L = 2.5 L_sun: no model of either law reaches it with the homology relation
    star = Star.from_user_units("too big", 3.0, 0.06, 2.5, 0.15, 6500.0, 120.0)
    result = fit_star(star, config, outdir=None, plots=False)
    assert result.status == "failed"
    assert result.reason.startswith(f"opacity law {LAWS[0]!r} failed: ")
    assert f"; opacity law {LAWS[1]!r} failed: " in result.reason
