"""Figures of a fitted star and of a catalog: files, axes, labels, edge cases (no pixel comparisons).

The star products come from real short fits (radwalk.inference.fit.fit_one); the
catalog documents from radwalk.results.document.result_document, as summary.json holds them.
"""

import dataclasses
import json
import os
import tempfile

os.environ.setdefault("MPLCONFIGDIR", tempfile.mkdtemp(prefix="radwalk-mpl-"))

import matplotlib  # noqa: E402

matplotlib.use("Agg")

import matplotlib.image  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

from radwalk.host.config import RunConfig, SamplerConfig  # noqa: E402
from radwalk.inference.fit import StarResult, fit_one  # noqa: E402
from radwalk.inference.star import Star, seed_for  # noqa: E402
from radwalk.report import figures as plots  # noqa: E402
from radwalk.results.document import result_document  # noqa: E402
from radwalk.results.files import dumps  # noqa: E402

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
STAR_KINDS = {"corner_parameters", "corner_timescales", "trace", "profile", "predictive"}
# The quick textbook stages, named: these tests are about the figures, and a polytrope fit takes seconds.
QUICK_STAGES = {"profile": "polytrope", "relation": "homology"}
CONFIG = RunConfig(stages=QUICK_STAGES,
                   sampler=SamplerConfig(walkers=16, chunk=200, max_steps=600, derived_samples=300))
SMALL = RunConfig(stages=QUICK_STAGES,
                  sampler=SamplerConfig(walkers=8, chunk=100, max_steps=200, derived_samples=100, optimizer_starts=2))


@pytest.fixture(scope="module")
def fitted():
    star = Star.from_user_units("t1", 1.0, 0.02, 1.0, 0.05, 5772, 60)
    return fit_one(star, CONFIG, seed_for(1, "t1"))


@pytest.fixture(scope="module")
def products(fitted):
    return fitted[1]


@pytest.fixture(scope="module")
def no_teff():
    star = Star.from_user_units("no-teff", 1.0, 0.02, 1.0, 0.05, None, None)
    return fit_one(star, SMALL, seed_for(1, "no-teff"))


@pytest.fixture(scope="module")
def pair(products, no_teff):
    """Two real fits to overlay.  Both use the default law: a second law would build a second
    relation grid (some 20 s on a cold cache); the two-law case is the slow test below."""
    return {"combined": products, "combined, no T_eff": no_teff[1]}


@pytest.fixture(scope="module")
def figures(products, pair):
    return plots.star_figures(products, comparison=pair)


def read_png(path):
    with open(path, "rb") as f:
        assert f.read(8) == PNG_SIGNATURE
    img = matplotlib.image.imread(path)  # decodes the whole file
    assert img.ndim == 3 and img.shape[0] > 300 and img.shape[1] > 300
    return img


def texts(fig):
    out = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        out += [t.get_text() for t in ax.texts] + [ax.get_title()]
    return out


# ----------------------------------------------------------------------------- files


def test_write_star_plots_writes_valid_pngs(tmp_path, products, pair):
    got = plots.write_star_plots(products, tmp_path, comparison=pair)
    assert set(got) == STAR_KINDS | {"opacity_comparison"}
    for kind, name in got.items():
        assert name == f"{kind}.png"
        read_png(tmp_path / name)
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporary files left
    assert all((tmp_path / n).stat().st_mode & 0o044 for n in got.values())  # readable by a web server


def test_no_comparison_plot_for_a_single_law(tmp_path, products):
    got = plots.write_star_plots(products, tmp_path, comparison={"combined": products})
    assert set(got) == STAR_KINDS
    assert not (tmp_path / "opacity_comparison.png").exists()


# ----------------------------------------------------------------------------- corner of the parameters


def test_corner_parameters_labels_and_map(figures, products):
    fig = figures["corner_parameters"]
    ndim = products.samples.shape[1]
    axes = np.array(fig.axes).reshape(ndim, ndim)
    labels = [ax.get_xlabel() for ax in axes[-1]]
    assert labels == [plots.axis_label(lab, u) for lab, u in zip(products.param_labels, products.param_units)]
    assert r"M_\odot" in labels[0] and "[" in labels[0]
    assert [ax.get_ylabel() for ax in axes[1:, 0]] == labels[1:]
    assert products.chain.names[0] == "mass" and r"M_\odot" in axes[0, 0].get_title()
    sampled = len(products.chain.map_theta)
    for j in range(ndim):  # MAP marked on the diagonal of every sampled parameter, none on prior-drawn ones
        xs = [tuple(line.get_xdata()) for line in axes[j, j].lines]
        if j < sampled:
            assert (products.chain.map_theta[j], products.chain.map_theta[j]) in xs
        else:
            assert "drawn from its prior" in axes[j, j].get_title()


def test_prior_overlay_marks_the_unconstrained_parameters(figures, fitted):
    summary, products = fitted
    ndim = products.samples.shape[1]
    names = list(summary["parameters"])  # sampled parameters, then those drawn from their priors
    assert len(names) == ndim
    axes = np.array(figures["corner_parameters"].axes).reshape(ndim, ndim)
    overlaid = {names[j] for j in range(ndim) if any(p.get_gid() == "prior" for p in axes[j, j].patches)}
    # the same rule (posterior std / prior std >= 0.5) as the summary's "unconstrained" list
    assert overlaid == set(summary["unconstrained"])
    assert "mass" not in overlaid and overlaid  # the mass is measured; composition and n are not
    for j in range(ndim):
        title = axes[j, j].get_title()
        assert ("prior-dominated" in title or "drawn from its prior" in title) == (names[j] in overlaid)


# ----------------------------------------------------------------------------- corner of the timescales


def test_corner_timescales_labels(figures, products):
    names, data, notes = plots.timescale_columns(products)
    fig = figures["corner_timescales"]
    k = len(names)
    assert {"diffusion_time", "kelvin_helmholtz_time", "dynamical_time"} <= set(names)
    assert len(fig.axes) == k * k
    bottom = [ax.get_xlabel() for ax in np.array(fig.axes).reshape(k, k)[-1]]
    for name, label in zip(names, bottom):
        assert r"\log_{10}" in label
        assert ("[\\mathrm{s}]" if name == "dynamical_time" else "[\\mathrm{yr}]") in label
    assert np.allclose(data[:, names.index("diffusion_time")],
                       np.log10(products.derived["diffusion_time"]))


def test_timescale_columns_drop_bad_columns_with_a_note(products):
    n = len(products.derived["diffusion_time"])
    derived = dict(products.derived)
    derived["dynamical_time"] = np.full(n, 1500.0)  # constant
    rad = np.array(derived["diffusion_time"])
    rad[: n // 2] = 0.0  # half the models without radiative layers
    derived["diffusion_time_radiative_core"] = rad
    kh = np.array(derived["kelvin_helmholtz_time"])
    kh[3] = np.nan  # one broken sample: only that row goes
    derived["kelvin_helmholtz_time"] = kh
    p = dataclasses.replace(products, derived=derived)
    names, data, notes = plots.timescale_columns(p)
    assert names == ["diffusion_time", "kelvin_helmholtz_time"]
    assert data.shape == (n - 1, 2) and np.isfinite(data).all()
    joined = " ".join(notes)
    assert "constant" in joined and "50 %" in joined and "1 samples" in joined
    fig = plots.corner_timescales_figure(p)
    assert len(fig.axes) == 4
    assert any("constant" in t for t in texts(fig))


def test_timescale_corner_with_one_or_no_column(tmp_path, products):
    n = len(products.derived["diffusion_time"])
    one = dict(products.derived, kelvin_helmholtz_time=np.zeros(n), dynamical_time=np.full(n, np.inf),
               diffusion_time_radiative_core=np.full(n, np.nan))
    fig = plots.corner_timescales_figure(dataclasses.replace(products, derived=one))
    assert len(fig.axes) == 1 and r"t_\mathrm{diff}" in fig.axes[0].get_xlabel()
    none = {k: v for k, v in one.items() if k != "diffusion_time"}
    fig = plots.corner_timescales_figure(dataclasses.replace(products, derived=none))
    assert any("no timescale" in t for t in texts(fig))
    plots.save_figure(fig, tmp_path / "empty.png")
    read_png(tmp_path / "empty.png")


# ----------------------------------------------------------------------------- trace


def test_trace_panels_and_burn_in_line(figures, products):
    fig = figures["trace"]
    chain = products.chain
    steps, walkers, ndim = chain.chain.shape
    assert len(fig.axes) == ndim + 1  # every parameter, then the log-probability
    paths = [chain.chain[:, :, j] for j in range(ndim)] + [chain.log_prob]
    for j, (ax, path) in enumerate(zip(fig.axes, paths)):
        burn = [line for line in ax.lines if line.get_gid() == "burn-in"]
        assert len(burn) == 1 and tuple(burn[0].get_xdata()) == (chain.burn, chain.burn)
        shaded = [p for p in ax.patches if np.allclose(p.get_extents().intervalx, ax.transData.transform(
            [(0, 0), (chain.burn, 0)])[:, 0])]
        assert shaded  # the burn-in span shaded on every panel alike
        (walker_paths,) = [c for c in ax.collections if c.get_gid() == "walkers"]
        segments = walker_paths.get_segments()
        assert len(segments) == walkers
        assert np.array_equal(segments[0][:, 1], path[:, 0]) and np.array_equal(segments[-1][:, 1], path[:, -1])
        assert np.array_equal(segments[0][:, 0], np.arange(steps))
        if j < ndim:
            assert ax.get_ylabel() == plots.axis_label(products.param_labels[j], products.param_units[j])
            assert any(f"{chain.tau[j]:.1f}" in t.get_text() for t in ax.texts)
    lp_ax = fig.axes[-1]
    assert lp_ax.get_ylabel() == "log posterior"
    (map_line,) = [line for line in lp_ax.lines if line.get_gid() == "map-log-prob"]
    assert map_line.get_ydata()[0] == chain.map_log_prob
    lo, hi = lp_ax.get_ylim()  # every step after burn-in and the best one inside the panel
    after = chain.log_prob[chain.burn:]
    assert lo < after.min() and hi > max(chain.log_prob.max(), chain.map_log_prob)
    head = fig.get_suptitle()
    assert ("NOT converged" in head) == (not chain.converged) and "converged" in head
    assert f"burn-in {chain.burn}" in head
    assert fig.axes[-1].get_xlabel() == "step"


def test_log_prob_limits_leave_burn_in_excursions_off_scale():
    rng = np.random.default_rng(3)
    lp = -5.0 + rng.standard_normal((400, 8))
    lp[:20] -= 1e4  # walkers far down during the first steps of burn-in
    (lo, hi), below = plots._log_prob_limits(lp, burn=50)
    assert below and lo > -20 and hi > lp.max()
    (lo, hi), below = plots._log_prob_limits(lp[20:], burn=30)
    assert not below and lo < lp[50:].min()


# ----------------------------------------------------------------------------- profile


def test_profile_has_five_panels_with_units(figures, products):
    fig = figures["profile"]
    panels = [ax for ax in fig.axes if ax.axison]
    assert len(panels) == 5
    units = [r"\mathrm{g\,cm^{-3}}", r"[\mathrm{K}]", r"\mathrm{cm^{2}\,g^{-1}}", r"[\mathrm{cm}]",
             r"[\mathrm{yr}]"]
    for ax, unit in zip(panels, units):
        assert unit in ax.get_ylabel()
        assert len(ax.collections) == 2  # the 68 % and 95 % bands
    assert [ax.get_yscale() for ax in panels] == ["log"] * 4 + ["linear"]
    assert panels[4].get_xlabel() == panels[3].get_xlabel() == r"$r/R$"
    median = panels[0].lines[0].get_ydata()
    assert np.allclose(median, products.bands["rho"][2], equal_nan=True)


def test_convective_spans_of_a_band_row():
    r = np.linspace(0.0, 1.0, 11)
    row = np.array([1, 1, 0.4, 0, 0, 0, 0.5, 1, 1, 1, 1], dtype=float)  # a core and an envelope
    assert np.allclose(plots.convective_spans(row, r), [(0.0, 0.15), (0.55, 1.0)])
    assert plots.convective_spans(np.zeros(11), r) == []


def test_profile_shades_the_convective_layers(figures, products):
    band = products.bands["convective"]
    assert band.shape == (5, products.r_rel.size)
    assert np.all((band >= 0) & (band <= 1)) and np.all(np.diff(band, axis=0) >= 0)  # percentile rows rise
    fig = figures["profile"]
    panels = [ax for ax in fig.axes if ax.axison]
    spans = [p for p in panels[0].patches if p.get_gid() == "convective"]
    expected = sum(len(plots.convective_spans(band[i], products.r_rel)) for i in (2, 4))  # 50 % and 97.5 %
    assert len(spans) == expected
    legend = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    if expected:
        assert any(text.startswith("convective in") for text in legend)
    # a product without the convective band (written before it existed) still draws, with a note
    old = dataclasses.replace(products, bands={k: v for k, v in products.bands.items() if k != "convective"})
    assert any("not recorded" in t for t in texts(plots.profile_figure(old)))


# ----------------------------------------------------------------------------- predictive check


def test_predictive_marks_observations(figures, products):
    fig = figures["predictive"]
    assert len(fig.axes) == 3
    assert not any("not measured" in t for t in texts(fig))
    for ax, key in zip(fig.axes, ("radius", "luminosity", "teff")):
        value = products.observed[key][0]
        assert any(tuple(line.get_xdata()) == (value, value) for line in ax.lines)
        assert "[" in ax.get_xlabel()


def test_predictive_says_not_measured(no_teff):
    _, products = no_teff
    assert np.isnan(products.observed["teff"][0])
    fig = plots.predictive_figure(products)
    ax_t = fig.axes[2]
    assert any("not measured" in t.get_text() for t in ax_t.texts) and "not measured" in ax_t.get_title()
    assert not ax_t.lines  # no observation line where nothing was observed
    assert not any("not measured" in t.get_text() for t in fig.axes[0].texts)


def test_opacity_comparison_legend_names_the_entries(figures, pair):
    fig = figures["opacity_comparison"]
    assert len(fig.axes) == 2
    assert r"M_\odot" in fig.axes[0].get_xlabel() and "[\\mathrm{yr}]" in fig.axes[1].get_xlabel()
    for ax in fig.axes:
        names = [t.get_text() for t in ax.get_legend().get_texts()]
        assert len(names) == len(pair)
        for key, name in zip(pair, names):
            assert name.startswith(key + ":")


@pytest.mark.slow
def test_opacity_comparison_of_two_laws(tmp_path, products):
    kramers = fit_one(products.star, SMALL, seed_for(1, "t1"), opacity="kramers")[1]
    got = plots.write_star_plots(products, tmp_path, comparison={"combined": products, "kramers": kramers})
    read_png(tmp_path / got["opacity_comparison"])
    fig = plots.opacity_comparison_figure({"combined": products, "kramers": kramers})
    names = [t.get_text() for t in fig.axes[1].get_legend().get_texts()]
    assert names[0].startswith("combined:") and names[1].startswith("kramers:")


def test_dollar_in_star_id_is_shown_literally(tmp_path, products):
    odd = dataclasses.replace(products, star=dataclasses.replace(products.star, id="cheap $5 star"))
    fig = plots.predictive_figure(odd)
    plots.save_figure(fig, tmp_path / "odd.png")  # a bare '$' would break mathtext at drawing
    read_png(tmp_path / "odd.png")


# ----------------------------------------------------------------------------- text helpers


def test_estimate_and_unit_text():
    assert plots.estimate_tex(0.950, 0.987, 1.020) == "$0.987^{+0.033}_{-0.037}$"
    assert plots.estimate_tex(5.0e4, 6.3e4, 1.02e5) == r"$(6.3^{+3.9}_{-1.3})\times10^{4}$"
    assert plots.estimate_tex(np.nan, 1.0, 2.0) == "n/a"
    assert plots.unit_tex("g / cm3") == r"\mathrm{g}\,\mathrm{cm}^{-3}"
    assert plots.unit_tex("erg / s") == r"\mathrm{erg}\,\mathrm{s}^{-1}"
    assert plots.unit_tex("M_sun") == r"M_\odot"
    assert plots.axis_label("$X$", "") == "$X$"


# ----------------------------------------------------------------------------- catalog plots


@pytest.fixture(scope="module")
def documents(fitted, no_teff):
    ok = result_document(fitted[1].star, CONFIG, StarResult("t1", "ok", "", fitted[0], 1.0))
    nt = result_document(no_teff[1].star, SMALL, StarResult("no-teff", "not-converged", "short", no_teff[0], 1.0))
    bad_star = Star.from_user_units("bad", 0.5, 0.02, 0.04, 0.004, 3600, 50)
    failed = result_document(bad_star, CONFIG, StarResult("bad", "failed", "no model reaches R", {}, 0.1))
    blind = Star.from_user_units("blind", None, None, 2.0, 0.1, None, None)
    failed_no_numbers = result_document(blind, CONFIG, StarResult("blind", "failed", "broken", {}, 0.1))
    # as read back from summary.json (strict JSON: a missing number is null)
    return [json.loads(dumps(d)) for d in (ok, nt, failed, failed_no_numbers)]


def legend_texts(ax):
    leg = ax.get_legend()
    return [t.get_text() for t in leg.get_texts()] if leg else []


def test_hr_diagram_with_failed_and_missing_teff(documents):
    fig = plots.hr_diagram_figure(documents)
    ax = fig.axes[0]
    labels = legend_texts(ax)
    assert "observed" in labels and "failed fit (observed)" in labels
    assert any(lab.startswith("posterior predictive") for lab in labels)
    lo, hi = ax.get_xlim()
    assert lo > hi  # T_eff decreases to the right
    assert "T_\\mathrm{eff}" in ax.get_xlabel() and "[\\mathrm{K}]" in ax.get_xlabel()
    assert r"L_\odot" in ax.get_ylabel()
    assert "without a measured" in ax.get_title()
    # the failed star sits at its observed place
    failed = [c for c in ax.containers if c.get_label() == "failed fit (observed)"][0]
    x, y = failed.lines[0].get_data()
    assert np.allclose([x[0], y[0]], [np.log10(3600), np.log10(0.04)])


def test_timescales_vs_mass_skips_failed_stars(documents):
    fig = plots.timescales_vs_mass_figure(documents)
    ax = fig.axes[0]
    assert ax.get_xscale() == ax.get_yscale() == "log"
    assert r"M_\odot" in ax.get_xlabel() and "yr" in ax.get_ylabel()
    labels = legend_texts(ax)
    assert any("diffusion" in lab for lab in labels) and any("Kelvin" in lab for lab in labels)
    assert any("energy-transport" in lab for lab in labels)
    assert not any("main-sequence lifetime" in lab for lab in labels)  # a polytrope fit has no lifetime
    points = sum(len(c.lines[0].get_xdata()) for c in ax.containers)
    assert points == 2 * 3  # two fitted stars x three timescales; the failed ones have no numbers
    mass = documents[0]["parameters"]["mass"]["p50"]
    xs = np.concatenate([c.lines[0].get_xdata() for c in ax.containers])
    assert np.isclose(xs, mass).any()


@pytest.mark.parametrize("subset", [[], [2], [3], [0]])
def test_catalog_plots_cope_with_few_stars(tmp_path, documents, subset):
    docs = [documents[i] for i in subset]
    got = plots.write_catalog_plots(docs, tmp_path)
    assert got == {"hr_diagram": "hr_diagram.png", "timescales_vs_mass": "timescales_vs_mass.png"}
    for name in got.values():
        read_png(tmp_path / name)
    if not subset or subset == [3]:
        figs = plots.catalog_figures(docs)
        assert any("no star" in t for t in texts(figs["hr_diagram"]))
        assert any("no fitted star" in t for t in texts(figs["timescales_vs_mass"]))
