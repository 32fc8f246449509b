"""A catalog run fits and stores every star before it draws any plot; plots can be left out and drawn by a later
run without fitting again; a star's stored results are those of a fit that draws its own plots.

Real runs on the local pool with the quick textbook-stage config (tests/run/quick_run.py); the order is read
from the run's own files (modification times) and its log, not from mocks.
"""

import json
import re
from pathlib import Path

import h5py
import numpy as np
import pytest
from quick_run import quick_run_toml

from radwalk.inference.fit import fit_laws, fit_star
from radwalk.results.layout import LOG_FILE, star_folder
from radwalk.run.catalog import read_catalog
from radwalk.run.orchestrate import load_run_config, run_catalog
from radwalk.run.star_figures import stored_products

CATALOG = ("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
           "a,1.0,0.04,1.0,0.05,5772,100\n"
           "b,1.3,0.06,2.5,0.15,6500,120\n"
           "c,0.8,0.04,0.35,0.03,4900,90\n"
           "bad,1.1,-0.05,1.2,0.1,6000,100\n")  # a negative uncertainty: fails, and has no plots
FITTED = ("a", "b", "c")


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    d = tmp_path_factory.mktemp("plots_after")
    (d / "cat.csv").write_text(CATALOG)
    (d / "quick.toml").write_text(quick_run_toml(seed=5))
    return d, load_run_config(d / "quick.toml")


def _pngs(out: Path) -> list[Path]:
    return sorted((out / "stars").rglob("*.png"))


def _chain_state(out: Path) -> dict:
    """Each fitted star's chain.h5: modification time and bytes (a refit rewrites both)."""
    return {s: ((star_folder(out, s) / "chain.h5").stat().st_mtime_ns, (star_folder(out, s) / "chain.h5").read_bytes())
            for s in FITTED}


def _doc(out: Path, star_id: str) -> dict:
    return json.loads((star_folder(out, star_id) / "summary.json").read_text())


def test_every_star_is_stored_before_any_plot_is_drawn(setup):
    d, config = setup
    out = d / "run"
    o = run_catalog(d / "cat.csv", out, config, workers=2, report=True, quiet=True)
    assert (o.computed, o.drawn, o.undrawn, o.failed) == (3, 3, 0, 1)
    chains = [(star_folder(out, s) / "chain.h5").stat().st_mtime_ns for s in FITTED]
    pngs = _pngs(out)
    assert len(pngs) == 5 * len(FITTED)
    assert max(chains) <= min(p.stat().st_mtime_ns for p in pngs)
    # the log: every star's line (written when its summary.json is stored) before the first plot's line
    lines = (out / LOG_FILE).read_text().splitlines()
    stored = [i for i, line in enumerate(lines) if re.search(r" star '\w+' (ok|not-converged|failed) ", line)]
    drawn = [i for i, line in enumerate(lines) if "figures of star" in line]
    assert len(stored) == 4 and len(drawn) == 3
    assert max(stored) < min(drawn)
    for s in FITTED:
        doc = _doc(out, s)
        assert set(doc["plots"]) == {"corner_parameters", "corner_timescales", "trace", "profile", "predictive"}
        page = (out / "report" / f"{s}.html").read_text()
        assert page.count('<img src="../stars/') == 5 and "No plots were drawn" not in page
    assert not list(star_folder(out, "bad").glob("*.png"))


def test_no_plots_then_a_later_run_draws_them_without_fitting_again(setup):
    d, config = setup
    out = d / "later"
    o = run_catalog(d / "cat.csv", out, config, workers=1, report=True, plots=False, quiet=True)
    assert (o.computed, o.drawn, o.undrawn) == (3, 0, 3)
    assert _pngs(out) == []
    assert all("plots" not in _doc(out, s) for s in FITTED)
    assert o.report is not None and o.report.is_file()
    page = (out / "report" / "a.html").read_text()
    assert "No plots were drawn for this star" in page and "<img" not in page
    assert "Not available (no image was written)" not in page
    before = _chain_state(out)

    o = run_catalog(d / "cat.csv", out, config, workers=1, report=True, quiet=True)
    assert (o.computed, o.resumed, o.drawn, o.undrawn) == (0, 3, 3, 0)
    assert _chain_state(out) == before  # not fitted again
    assert len(_pngs(out)) == 5 * len(FITTED)
    assert "No plots were drawn" not in (out / "report" / "a.html").read_text()

    # a plot lost (a run stopped while drawing): only that star is drawn again
    (star_folder(out, "b") / "trace.png").unlink()
    kept = (star_folder(out, "a") / "trace.png").stat().st_mtime_ns
    o = run_catalog(d / "cat.csv", out, config, workers=1, report=False, quiet=True)
    assert (o.computed, o.drawn) == (0, 1)
    assert (star_folder(out, "b") / "trace.png").is_file()
    assert (star_folder(out, "a") / "trace.png").stat().st_mtime_ns == kept
    assert _chain_state(out) == before


def _same_chain_files(a: Path, b: Path):
    with h5py.File(a, "r") as fa, h5py.File(b, "r") as fb:
        for name in ("chain", "log_prob"):
            assert np.array_equal(fa[name][...], fb[name][...])
        assert sorted(fa.attrs) == sorted(fb.attrs)
        for key in fa.attrs:
            assert np.array_equal(fa.attrs[key], fb.attrs[key]), key


@pytest.mark.parametrize("toml", [
    # two opacity laws: the compared law's chain file and the comparison plot
    quick_run_toml(seed=5).replace('opacity = "combined"', 'opacity = ["combined", "kramers"]'),
    # the default stages (the track grid), whose profile bands are solved only for the plots: their warnings
    # join the star's when the plots are drawn after the fit, as when the fit draws them itself
    "[settings]\nband_stars = 1\n\n[sampler]\nwalkers = 16\nchunk = 100\nmax_steps = 200\nderived_samples = 60\n"
    "optimizer_starts = 1\n\n[run]\nseed = 5\n",
], ids=["two-laws", "track-grid"])
def test_stored_results_equal_those_of_a_fit_that_draws_its_own_plots(setup, tmp_path, toml):
    d, _ = setup
    (tmp_path / "c.toml").write_text(toml)
    config = load_run_config(tmp_path / "c.toml")
    (tmp_path / "one.csv").write_text("\n".join(CATALOG.splitlines()[:2]) + "\n")
    star = next(iter(read_catalog(tmp_path / "one.csv", config.columns))).star
    run_catalog(tmp_path / "one.csv", tmp_path / "run", config, workers=1, report=False, quiet=True)
    later = star_folder(tmp_path / "run", "a")
    inline = tmp_path / "inline"
    assert fit_star(star, config, outdir=inline).status != "failed"
    a, b = _doc(tmp_path / "run", "a"), json.loads((inline / "summary.json").read_text())
    a.pop("seconds"), b.pop("seconds")  # wall times
    assert a == b and list(a) == list(b)
    names = sorted(p.name for p in inline.iterdir())
    assert names == sorted(p.name for p in later.iterdir())
    for name in names:
        if name.endswith(".h5"):
            _same_chain_files(later / name, inline / name)
    # the products the plots are drawn from are the fit's, number for number
    fitted = fit_laws(star, config)[1]
    rebuilt = stored_products(star, config, later)
    assert list(rebuilt) == list(fitted)
    for op, p in fitted.items():
        q = rebuilt[op]
        assert np.array_equal(p.samples, q.samples) and np.array_equal(p.derived_rows, q.derived_rows)
        assert p.derived.keys() == q.derived.keys()
        for key in p.derived:
            assert np.array_equal(p.derived[key], q.derived[key], equal_nan=True), key
        assert (p.param_names, p.param_labels, p.param_units) == (q.param_names, q.param_labels, q.param_units)
        for field in ("burn", "thin", "converged", "map_log_prob"):
            assert getattr(p.chain, field) == getattr(q.chain, field), field
        assert np.array_equal(p.chain.map_theta, q.chain.map_theta) and np.array_equal(p.chain.tau, q.chain.tau)
        p.ensure_bands(), q.ensure_bands()
        assert np.array_equal(p.r_rel, q.r_rel) and p.band_notes == q.band_notes
        for key in p.bands:
            assert np.array_equal(p.bands[key], q.bands[key], equal_nan=True), key


@pytest.mark.dask
def test_dask_workers_draw_the_plots_after_the_fits(setup):
    d, config = setup
    (d / "two.csv").write_text("\n".join(CATALOG.splitlines()[:3]) + "\n")
    out = d / "dask"
    o = run_catalog(d / "two.csv", out, config, executor="dask", workers=1, report=False, quiet=True)
    assert (o.computed, o.drawn, o.undrawn) == (2, 2, 0)
    for s in ("a", "b"):
        assert len(_doc(out, s)["plots"]) == 5
    assert max((star_folder(out, s) / "chain.h5").stat().st_mtime_ns for s in ("a", "b")) <= \
        min(p.stat().st_mtime_ns for p in _pngs(out))
