"""No text of a per-star figure runs past the figure's edges (a long star name, an unmeasured luminosity).

Every drawn text - titles, axis labels, tick labels, legends, notes - is
measured with the Agg renderer the PNG is written with, at the PNG's dpi.
The star products come from real short fits, as in test_plots.py.
"""

import dataclasses
import os
import tempfile

os.environ.setdefault("MPLCONFIGDIR", tempfile.mkdtemp(prefix="radwalk-mpl-"))

import matplotlib  # noqa: E402

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.text import Text  # noqa: E402

from radwalk.host.config import RunConfig, SamplerConfig  # noqa: E402
from radwalk.inference.fit import fit_one  # noqa: E402
from radwalk.inference.star import Star, seed_for  # noqa: E402
from radwalk.report import figures as plots  # noqa: E402

QUICK = RunConfig(stages={"profile": "polytrope", "relation": "homology"},
                  sampler=SamplerConfig(walkers=8, chunk=100, max_steps=200, derived_samples=100, optimizer_starts=2))
# as long as a catalog's designations get: a survey name, a component and a comment
LONG_ID = "HD 123456 B = 2MASS J12345678+1234567 (component B of a wide visual triple, survey field 17)"


@pytest.fixture(scope="module")
def long_named():
    star = Star.from_user_units(LONG_ID, 1.0, 0.02, 1.0, 0.05, 5772, 60)
    return fit_one(star, QUICK, seed_for(1, "edges"))[1]


@pytest.fixture(scope="module")
def long_named_no_luminosity():
    star = Star.from_user_units(LONG_ID + " (no L)", 1.0, 0.02, None, None, 5772, 60)
    return fit_one(star, QUICK, seed_for(1, "edges, no L"))[1]


def drawn_texts(fig):
    """The figure's texts that reach the PNG: visible, not empty, tick labels only of ticks inside the view."""
    out = []
    ticklabels = set()
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            if not ax.axison:  # an axes drawn without its axes: no tick labels
                ticklabels.update(t for tick in axis.get_major_ticks() + axis.get_minor_ticks()
                                  for t in (tick.label1, tick.label2))
                continue
            lo, hi = sorted(axis.get_view_interval())
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                ticklabels.update((tick.label1, tick.label2))
                if lo - 1e-9 * abs(hi - lo) <= tick.get_loc() <= hi + 1e-9 * abs(hi - lo):
                    out += [t for t in (tick.label1, tick.label2) if t.get_visible() and t.get_text()]
    for t in fig.findobj(Text):
        if t in ticklabels or not (t.get_visible() and t.get_text().strip()):
            continue
        if any(not a.get_visible() for a in _ancestors(t)):  # inside a hidden legend or axes
            continue
        out.append(t)
    return out


def _ancestors(artist):
    axes = artist.axes
    legend = getattr(artist, "_legend", None)
    return [a for a in (axes, legend) if a is not None]


def outside(fig):
    """[(text, its window extent)] of the drawn texts not inside the figure (half a pixel of slack)."""
    FigureCanvasAgg(fig)
    fig.set_dpi(plots.DPI)
    with matplotlib.rc_context(plots.STYLE):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        box = fig.bbox
        bad = []
        for t in drawn_texts(fig):
            e = t.get_window_extent(renderer)
            if e.x0 < box.x0 - 0.5 or e.y0 < box.y0 - 0.5 or e.x1 > box.x1 + 0.5 or e.y1 > box.y1 + 0.5:
                bad.append((t.get_text()[:60], tuple(np.round(e.extents, 1))))
    return bad


def test_the_check_sees_a_clipped_title(long_named):
    fig = plots.predictive_figure(long_named)
    fig.suptitle("x" * 400)  # far wider than the figure
    assert any(text.startswith("xxx") for text, _ in outside(fig))


@pytest.mark.parametrize("kind", sorted(plots.STAR_PLOTS))
def test_nothing_clipped_for_a_long_star_name(kind, long_named):
    builder = dict(plots._star_builders())[kind]
    assert outside(builder(long_named)) == []


@pytest.mark.parametrize("kind", ["predictive", "corner_parameters", "trace"])
def test_nothing_clipped_without_a_luminosity(kind, long_named_no_luminosity):
    builder = dict(plots._star_builders())[kind]
    assert outside(builder(long_named_no_luminosity)) == []


def test_nothing_clipped_in_the_comparison(long_named, long_named_no_luminosity):
    other = dataclasses.replace(long_named_no_luminosity, opacity="combined")
    fig = plots.opacity_comparison_figure({"combined": long_named, "combined, luminosity not measured": other})
    assert outside(fig) == []


def test_nothing_clipped_in_a_timescale_corner_with_one_or_no_column(long_named):
    n = len(long_named.derived["diffusion_time"])
    one = dict(long_named.derived, kelvin_helmholtz_time=np.zeros(n), dynamical_time=np.full(n, np.inf),
               diffusion_time_radiative_core=np.full(n, np.nan))
    assert outside(plots.corner_timescales_figure(dataclasses.replace(long_named, derived=one))) == []
    none = {k: v for k, v in one.items() if k != "diffusion_time"}
    assert outside(plots.corner_timescales_figure(dataclasses.replace(long_named, derived=none))) == []
