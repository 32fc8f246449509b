"""A catalog run comparing two opacity laws, one of which cannot fit one star: the failing law is named in the
star's summary.json and in the run log, and the other law's fit of that star is kept (law_run.py)."""

from __future__ import annotations

import json
import math

import pytest
from law_run import FAILING_LAW, FAILING_STAR, LAWS, STARS, two_law_run

from radwalk.results.layout import star_folder


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return two_law_run(tmp_path_factory.mktemp("laws"), report=False)


def summary(out, star_id) -> dict:
    return json.loads((star_folder(out, star_id) / "summary.json").read_text())


def test_the_failing_law_is_named_and_the_other_fit_of_the_star_kept(run):
    out, outcome = run
    assert outcome.stars == len(STARS) and outcome.failed == 0  # the star has a fit: it did not fail
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
