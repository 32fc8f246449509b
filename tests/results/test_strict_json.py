"""Strict JSON: summary.json, state.json and every --json output hold no NaN or Infinity, only null,
and what reads them (summary table, report, resume) takes null as a missing value."""

import json
import math

import numpy as np
import pytest

from radwalk.cli.main import main
from radwalk.results.document import document
from radwalk.results.files import dumps, strict, write_json
from radwalk.results.layout import STAR_SUMMARY, star_folder
from radwalk.results.table import build_summary_table
from radwalk.run.state import _config_diff, load_done, summary_docs

NAN, INF = float("nan"), float("inf")


def refuse(name):
    raise ValueError(f"{name} is not JSON")


def strict_load(text: str):
    return json.loads(text, parse_constant=refuse)


class Entry:
    def __init__(self, id):
        self.id = id


def fitted_doc(star_id, status="ok"):
    """A summary document with the non-finite numbers a real fit can leave (numpy values included)."""
    return document(
        star_id, status, "" if status == "ok" else "stopped at max_steps", {
            "radius": (1.0, 0.02), "luminosity": (np.float64(1.1), 0.05), "teff": (NAN, NAN)},
        (0.1, 0.05), 7, np.float64(12.5),
        opacity="combined",
        stages={"profile": "polytrope", "opacity": "combined", "relation": "homology", "likelihood": "gaussian"},
        parameters={"mass": {"unit": "M_sun", "p16": 0.95, "p50": 1.0, "p84": np.float32(1.05), "map": NAN,
                             "tau": INF, "ess": np.float64(NAN), "prior": "uniform[0.1, 10]",
                             "posterior_over_prior_width": 0.01, "constrained": np.bool_(True),
                             "drawn_from_prior": False}},
        fixed={"n": 3.0},
        derived={"diffusion_time": {"unit": "yr", "p16": NAN, "p50": 1.7e5, "p84": -INF, "map": NAN},
                 "radius": {"unit": "R_sun", "p16": 0.99, "p50": 1.0, "p84": 1.01, "map": 1.0}},
        sampler={"walkers": 16, "steps": np.int64(400), "burn": 50, "thin": 5, "acceptance": 0.3,
                 "tau_max": INF, "converged": status == "ok", "reason": "", "samples": 1000,
                 "derived_samples": 100, "map_log_prob": -INF},
        ppc_pvalue=NAN, unconstrained=[], warnings=["w <b>"],
        profile=np.array([1.0, NAN, INF]),
    )


def failed_doc(star_id):
    return document(star_id, "failed", "no model reaches R", {"radius": (NAN, NAN), "luminosity": (2.0, 0.1),
                                                             "teff": (NAN, NAN)}, None, 7, 0.0, catalog_row=3)


def test_strict_converts_every_non_finite_number():
    got = strict({"a": NAN, "b": [INF, -INF, 1.5], "c": (np.float64(NAN), np.float32(2.0)), "d": np.array([[1.0, NAN]]),
                  "e": np.int64(3), "f": np.bool_(False), "g": None, "h": "NaN", "i": True, "j": 0})
    assert got == {"a": None, "b": [None, None, 1.5], "c": [None, 2.0], "d": [[1.0, None]], "e": 3, "f": False,
                   "g": None, "h": "NaN", "i": True, "j": 0}
    assert type(got["e"]) is int and type(got["f"]) is bool and type(got["c"][1]) is float


def test_dumps_is_strict_and_keeps_finite_values_exact():
    x = 0.1 + 0.2
    text = dumps({"x": x, "y": NAN, "z": [INF]})
    assert strict_load(text) == {"x": x, "y": None, "z": [None]}
    assert "NaN" not in text and "Infinity" not in text


def test_written_document_reads_back_as_strict_json(tmp_path):
    doc = fitted_doc("sun")
    write_json(tmp_path / STAR_SUMMARY, doc)
    back = strict_load((tmp_path / STAR_SUMMARY).read_text())
    assert back["observed"]["teff"] == {"value": None, "error": None}
    assert back["observed"]["luminosity"]["value"] == 1.1
    assert back["parameters"]["mass"]["map"] is None and back["parameters"]["mass"]["tau"] is None
    assert back["parameters"]["mass"]["p84"] == pytest.approx(1.05, rel=1e-7)
    assert back["derived"]["diffusion_time"]["p84"] is None and back["ppc_pvalue"] is None
    assert back["sampler"]["steps"] == 400 and back["profile"] == [1.0, None, None]
    assert back["feh"] == [0.1, 0.05]


@pytest.fixture
def run_dir(tmp_path):
    """A run folder whose summary.json files hold nulls: a fitted, a not-converged and a failed star."""
    out = tmp_path / "run"
    docs = [fitted_doc("sun"), fitted_doc("slow one", "not-converged"), failed_doc("bad/id")]
    for doc in docs:
        write_json(star_folder(out, doc["id"]) / STAR_SUMMARY, doc)
    return out, [d["id"] for d in docs]


def test_summary_table_reads_nulls_as_nan(run_dir):
    out, ids = run_dir
    table = build_summary_table(summary_docs(out, [Entry(i) for i in ids]))
    assert list(table["id"]) == ids
    sun = table[0]
    assert sun["radius_obs"] == 1.0 and math.isnan(sun["teff_obs"]) and math.isnan(sun["teff_obs_err"])
    assert math.isnan(sun["mass_map"]) and math.isnan(sun["diffusion_time_p16"]) and math.isnan(sun["ppc_pvalue"])
    assert math.isnan(sun["tau_max"]) and math.isnan(sun["ess_min"])
    assert sun["mass_p50"] == 1.0 and sun["diffusion_time_p50"] == 1.7e5 and sun["converged"]
    bad = table[2]
    assert bad["status"] == "failed" and math.isnan(bad["mass_p50"]) and math.isnan(bad["feh_obs"])
    assert bad["luminosity_obs"] == 2.0 and not bad["converged"]


def test_report_builds_from_documents_with_nulls(run_dir):
    from radwalk.report.pages import write_report

    out, ids = run_dir
    index = write_report(out)
    text = index.read_text(encoding="utf-8")
    assert "sun" in text and "slow one" in text and "bad/id" in text
    page = (index.parent / "sun.html").read_text(encoding="utf-8")
    assert "not measured" in page  # T_eff is null
    assert "Infinity" not in page and "NaN" not in page and "None" not in page


def test_resume_reads_a_document_with_nulls(tmp_path):
    from radwalk.host.config import RunConfig
    from radwalk.inference.star import Star
    from radwalk.results.chain import ChainFile
    from radwalk.results.document import star_fingerprint

    star = Star.from_user_units("sun", 1.0, 0.02, 1.1, 0.05, feh=0.1, feh_err=0.05)
    config = RunConfig(seed=7)
    folder = star_folder(tmp_path, "sun")
    ChainFile(folder / "chain.h5", ["mass"], 8).append(np.ones((400, 8, 1)), np.zeros((400, 8)))
    write_json(folder / STAR_SUMMARY, {**fitted_doc("sun"), "fingerprint": star_fingerprint(star, config)})
    doc = load_done(folder, star, config)
    assert doc is not None and doc["status"] == "ok" and doc["ppc_pvalue"] is None
    assert load_done(folder, star, RunConfig(seed=8)) is None  # another seed: not this run's


def test_a_config_value_written_as_null_is_no_difference():
    old = strict_load(dumps({"priors": {"mass": {"mean": NAN, "upper": INF}}, "sampler": {"walkers": 16}}))
    new = {"priors": {"mass": {"mean": NAN, "upper": INF}}, "sampler": {"walkers": 32}}
    assert _config_diff(old, new) == "sampler.walkers: 16 -> 32"


# 30 M_sun lies outside the track grid: the textbook stages, whose output has nulls (no convective envelope)
@pytest.mark.parametrize("argv", [["model", "--mass", "1", "--json"],
                                  ["model", "--mass", "30", "--profile", "polytrope", "--relation", "homology",
                                   "--json"],
                                  ["plugins", "--json"]])
def test_json_outputs_are_strict(capsys, argv):
    assert main(argv) == 0
    assert isinstance(strict_load(capsys.readouterr().out), dict)
