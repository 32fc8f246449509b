"""Resume reuses a star only when its summary.json is this star's, under this config, and whole: a per-star
fingerprint (catalog values, config, stages) and a check of the document and its chain file."""

import json
import shutil

import h5py
import numpy as np
import pytest
from quick_run import quick_run_toml

from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.fit import StarResult
from radwalk.inference.star import Star
from radwalk.results.chain import ChainFile
from radwalk.results.document import result_document
from radwalk.results.files import write_json
from radwalk.results.layout import STATE_FILE, star_folder
from radwalk.run.orchestrate import load_run_config, run_catalog
from radwalk.run.state import load_done

FAST_TOML = quick_run_toml(seed=3)
CATALOG = "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n" \
          "a,1.0,0.04,1.0,0.05,5772,100\nb,1.3,0.06,2.5,0.15,6500,120\n"


STAGES = {"profile": "polytrope", "opacity": "combined", "relation": "homology", "likelihood": "gaussian"}


def _written_star(folder, star, config, steps=40):
    """A star folder as a fit leaves it: a chain of ``steps`` steps and a summary.json saying so."""
    chain = ChainFile(folder / "chain.h5", ["mass"], 8)
    chain.append(np.ones((steps, 8, 1)), np.zeros((steps, 8)))
    summary = {"parameters": {"mass": {"unit": "M_sun", "p16": 0.9, "p50": 1.0, "p84": 1.1}},
               "derived": {"diffusion_time": {"unit": "yr", "p16": 1e5, "p50": 1.7e5, "p84": 2e5}},
               "sampler": {"steps": steps, "converged": True}}
    write_json(folder / "summary.json", result_document(star, config, StarResult(star.id, "ok", "", summary, 1.0)))


@pytest.fixture
def star_dir(tmp_path):
    star = Star.from_user_units("a", 1.0, 0.04, 1.0, 0.05, 5772.0, 100.0)
    config = RunConfig(stages=STAGES, seed=3)
    _written_star(tmp_path, star, config)
    return tmp_path, star, config


def test_whole_document_of_this_star_and_config_is_reused(star_dir):
    folder, star, config = star_dir
    assert load_done(folder, star, config)["status"] == "ok"


def test_hand_made_ok_document_is_not_reused(star_dir):
    folder, star, config = star_dir
    (folder / "summary.json").write_text(json.dumps({"id": "a", "status": "ok", "seed": 3}))
    assert load_done(folder, star, config) is None


def test_truncated_or_missing_chain_is_not_reused(star_dir):
    folder, star, config = star_dir
    with h5py.File(folder / "chain.h5", "a") as f:
        f["chain"].resize(10, axis=0)
    assert load_done(folder, star, config) is None
    (folder / "chain.h5").write_bytes(b"not hdf5")
    assert load_done(folder, star, config) is None


def test_other_config_stages_or_star_values_are_not_reused(star_dir):
    folder, star, config = star_dir
    assert load_done(folder, star, config.with_changes(sampler=SamplerConfig(walkers=10))) is None
    assert load_done(folder, star, config.with_changes(stages={**STAGES, "opacity": "kramers"})) is None
    moved = Star.from_user_units("a", 1.1, 0.04, 1.0, 0.05, 5772.0, 100.0)
    assert load_done(folder, moved, config) is None


@pytest.fixture(scope="module")
def ref(tmp_path_factory):
    d = tmp_path_factory.mktemp("resume")
    (d / "cat.csv").write_text(CATALOG)
    (d / "fast.toml").write_text(FAST_TOML)
    config = load_run_config(d / "fast.toml")
    run_catalog(d / "cat.csv", d / "ref", config, workers=1, report=False, plots=False, quiet=True)
    return d, config


def _rerun(d, out, config):
    return run_catalog(d / "cat.csv", out, config, workers=1, report=False, plots=False, quiet=True)


@pytest.mark.slow
def test_hand_made_summary_and_truncated_chain_are_recomputed(ref, tmp_path):
    d, config = ref
    out = tmp_path / "run"
    shutil.copytree(d / "ref", out)
    a, b = star_folder(out, "a"), star_folder(out, "b")
    good = json.loads((a / "summary.json").read_text())
    # a hand-made "ok" (it became a row of NaNs): no fit in it
    (a / "summary.json").write_text(json.dumps({"id": "a", "status": "ok", "seed": 3}))
    with h5py.File(b / "chain.h5", "a") as f:  # a chain cut short after its summary was written
        f["chain"].resize(10, axis=0)
    o = _rerun(d, out, config)
    assert (o.resumed, o.computed) == (0, 2)
    again = json.loads((a / "summary.json").read_text())
    assert again["parameters"] == good["parameters"] and again["derived"] == good["derived"]
    with h5py.File(b / "chain.h5", "r") as f:
        assert f["chain"].shape[0] == json.loads((b / "summary.json").read_text())["sampler"]["steps"]


@pytest.mark.slow
def test_changed_config_without_state_file_recomputes(ref, tmp_path):
    d, config = ref
    out = tmp_path / "run"
    shutil.copytree(d / "ref", out)
    (out / STATE_FILE).unlink()  # the run-level check is gone: the stars' own fingerprints must catch it
    changed = config.with_changes(sampler=type(config.sampler)(**{**config.sampler.__dict__, "max_steps": 300}))
    o = _rerun(d, out, changed)
    assert (o.resumed, o.computed) == (0, 2)
    for sid in ("a", "b"):
        assert json.loads((star_folder(out, sid) / "summary.json").read_text())["sampler"]["steps"] == 300
    assert _resumed_in_report(out) == (0, False)  # every star computed again: not a resumed run
    # unchanged config: everything is reused
    o = _rerun(d, out, changed)
    assert (o.resumed, o.computed) == (2, 0)
    assert _resumed_in_report(out) == (2, True)


def _resumed_in_report(out):
    """(run.toml's resumed_stars, whether the report's catalog page says "resumed" where it says when it ran)."""
    try:
        import tomllib
    except ImportError:  # Python 3.10
        import tomli as tomllib

    from radwalk.report.pages import write_report

    count = tomllib.loads((out / "run.toml").read_text())["provenance"]["resumed_stars"]
    ran = write_report(out).read_text().split("<dt>Ran</dt>", 1)[1].split("</dd>", 1)[0]
    return count, "resumed" in ran


@pytest.mark.slow
def test_changed_catalog_values_without_state_file_recompute_that_star(ref, tmp_path):
    d, config = ref
    out = tmp_path / "run"
    shutil.copytree(d / "ref", out)
    (out / STATE_FILE).unlink()
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG.replace("a,1.0,0.04", "a,1.1,0.04"))
    o = run_catalog(cat, out, config, workers=1, report=False, plots=False, quiet=True)
    assert (o.resumed, o.computed) == (1, 1)
    assert json.loads((star_folder(out, "a") / "summary.json").read_text())["observed"]["radius"]["value"] == 1.1
