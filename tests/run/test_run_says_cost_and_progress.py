"""A catalog run states the cost of sampling an opacity parameter once, before its stars start (as `radwalk fit`
does), and a run started from Python draws no carriage-return frames where stderr is not a terminal."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
from quick_run import quick_run_toml  # noqa: E402

from radwalk.cli.main import main  # noqa: E402
from radwalk.host.config import load  # noqa: E402
from radwalk.results.layout import LOG_FILE  # noqa: E402
from radwalk.run.orchestrate import run_catalog  # noqa: E402

CATALOG = ("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
           "a,1.0,0.04,1.0,0.05,5772,100\n"
           "b,1.1,0.04,1.3,0.06,5900,100\n")
COST = "sampling g_bf of opacity 'combined': every step solves the relation 'homology'"


def _files(tmp_path):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    config = tmp_path / "sampled.toml"
    # the textbook stages can vary the law: g_bf sampled with its declared prior, a short chain
    config.write_text(quick_run_toml(seed=2, max_steps=20).replace("chunk = 100", "chunk = 10")
                      + "\n[priors.g_bf]\n")
    return cat, config


@pytest.mark.slow  # two stars whose every walker solves its own law each step: minutes on a loaded machine
def test_run_prints_the_opacity_sampling_cost_once(tmp_path, capsys):
    cat, config = _files(tmp_path)
    code = main(["run", str(cat), "--out", str(tmp_path / "r"), "--config", str(config), "--workers", "1",
                 "--no-plots", "--no-report", "--quiet"])
    err = capsys.readouterr().err
    assert code == 0, err
    lines = [x for x in err.splitlines() if COST in x]
    assert len(lines) == 1 and lines[0].startswith("radwalk: "), err  # two stars, one line: once per run
    assert "per 1000 steps and at most" in lines[0] and "at max_steps = 20" in lines[0]
    assert sum(COST in x for x in (tmp_path / "r" / LOG_FILE).read_text().splitlines()) == 1


def test_run_catalog_from_python_writes_plain_lines_when_stderr_is_no_terminal(tmp_path, capsys):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    config = tmp_path / "quick.toml"
    config.write_text(quick_run_toml(seed=2, max_steps=100))
    outcome = run_catalog(cat, tmp_path / "r", load(config), workers=1, report=False, plots=False)
    err = capsys.readouterr().err  # captured: not a terminal, as in a notebook's log or a batch job's file
    assert outcome.failed == 0, err
    assert "\r" not in err and "\x1b" not in err  # no redrawn bar frames
    assert "radwalk: star 'a' " in err and "radwalk: star 'b' " in err  # a line per star instead
