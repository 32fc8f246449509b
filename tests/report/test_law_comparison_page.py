"""The catalog page of a run comparing two opacity laws: the comparison figure is written and linked, and the
law that could not fit a star is named (law_run.py).  No pixel comparisons: the figure's axes are checked."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "run"))
from law_run import FAILING_LAW, FAILING_STAR, LAWS, STARS, two_law_run  # noqa: E402

from radwalk.report.law_figures import LAW_FIGURE, law_comparison_figure, law_pairs, ratio_with_bars  # noqa: E402


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out, _ = two_law_run(tmp_path_factory)
    return out


def summaries(out):
    return [json.loads(p.read_text()) for p in sorted((out / "stars").glob("*/summary.json"))]


def test_the_catalog_page_links_the_comparison_figure(run):
    page = (run / "report" / "index.html").read_text()
    section = page[page.index('<h2 id="laws">'):page.index('<h2 id="table">')]
    assert f'<img src="{LAW_FIGURE}"' in section
    image = imread(run / "report" / LAW_FIGURE)
    assert image.ndim == 3 and image.shape[0] > 400 and image.shape[1] > 400
    # the failed fit is named, with its star
    assert f"{FAILING_STAR}: opacity law &#39;{FAILING_LAW}&#39; failed: " in section
    # one row a star in the table of stars, although summary.ecsv has one a star and law
    table = page[page.index('<table class="sortable wide" id="stars">'):]
    assert table.count('<tr class="row-') == len(STARS)


def test_the_figure_draws_each_star_both_laws_fitted(run):
    docs = summaries(run)
    (pair,) = law_pairs(docs)
    assert (pair.reference, pair.law) == LAWS
    both = [s for s in STARS if s != FAILING_STAR]
    assert pair.ids == both and pair.left_out == [(FAILING_STAR, f"{FAILING_LAW} failed")]
    by_id = {d["id"]: d for d in docs}
    for j, sid in enumerate(pair.ids):
        for law, got in ((LAWS[0], pair.a), (LAWS[1], pair.b)):
            want = by_id[sid]["comparison"][law]["parameters"]["mass"]
            assert list(got["mass"][j]) == [want["p16"], want["p50"], want["p84"]]
    fig = law_comparison_figure(docs)
    axes = fig.axes
    assert len(axes) == 4
    mass_ax, time_ax, mass_ratio_ax, time_ratio_ax = axes
    assert time_ax.get_xscale() == "log" and time_ratio_ax.get_yscale() == "log"
    assert "combined" in mass_ax.get_xlabel() and "M" in mass_ratio_ax.get_xlabel()
    # the 1:1 line spans the panel's square limits
    one = [ln for ln in mass_ax.get_lines() if ln.get_label() == "1:1"]
    assert len(one) == 1 and np.allclose(one[0].get_xdata(), one[0].get_ydata())
    assert mass_ax.get_xlim() == mass_ax.get_ylim()


def test_a_run_of_one_law_has_no_comparison_figure():
    one = {"id": "a", "status": "ok", "parameters": {"mass": {"p16": 0.9, "p50": 1.0, "p84": 1.1}}}
    assert law_pairs([one]) == [] and law_comparison_figure([one]) is None


def test_ratio_bars_add_the_log_half_widths_in_quadrature():
    # A = 1 with ln half-widths ln 1.1; B = 2 with ln half-widths ln 1.2: the ratio's ln half-width is
    # sqrt(ln(1.1)^2 + ln(1.2)^2), its median ratio 2
    qa = np.array([[1 / 1.1, 1.0, 1.1]])
    qb = np.array([[2 / 1.2, 2.0, 2.4]])
    ratio, bars = ratio_with_bars(qa, qb)
    w = np.hypot(np.log(1.1), np.log(1.2))
    assert ratio[0] == pytest.approx(2.0)
    assert bars[0, 0] == pytest.approx(2.0 * (1 - np.exp(-w))) and bars[1, 0] == pytest.approx(2.0 * np.expm1(w))
