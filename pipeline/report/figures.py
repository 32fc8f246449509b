"""Figures of one fitted star and of a whole catalog, written as PNG files.

Per star (from :class:`radwalk.results.products.FitProducts`): a corner plot of the fitted
parameters, a corner plot of the transport timescales, the walkers' traces and log-probability, the
radial profile with credible bands, a posterior-predictive check of R, L and
T_eff and, when several opacity laws were fitted, their comparison.  Per
catalog (from the per-star summary documents): an HR diagram, the
timescales against mass and, for an invented catalog with its true
parameters, the recovered against the true mass.

Every builder returns a :class:`matplotlib.figure.Figure` that belongs to no
pyplot window, so nothing is kept alive after saving and nothing depends on an
interactive backend; the ``write_*`` functions save them atomically.
"""

from __future__ import annotations

import math
import os
import re
import sys
import textwrap
from pathlib import Path

import matplotlib

# corner imports pyplot; select the non-interactive backend first, but never
# switch the backend of a session that already imported pyplot (that would
# close its windows) - our figures render through Agg either way.
if "matplotlib.pyplot" not in sys.modules:
    matplotlib.use("Agg")

import corner  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.collections import LineCollection  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter  # noqa: E402

from radwalk import constants as k  # noqa: E402
from radwalk.forward.quantities import TIMESCALES, latex_label, latex_symbol, output_unit  # noqa: E402
from radwalk.results.files import atomic_path  # noqa: E402
from radwalk.results.products import BAND_PERCENTILES, FitProducts  # noqa: E402

DPI = 110
# Tick labels as plain text: as mathtext each distinct label is parsed (pyparsing) before it is drawn, about a
# tenth of a star's figure time (benchmarks/figure_cost.py); they look the same.  Titles, axis labels and log
# axes keep their mathtext.
STYLE = {"font.size": 10, "axes.labelsize": 11, "axes.titlesize": 11, "xtick.labelsize": 9,
         "ytick.labelsize": 9, "legend.fontsize": 9, "axes.formatter.use_mathtext": False}
POSTERIOR = "#1f4e79"
MAP_COLOUR = "#d62728"
PRIOR_COLOUR = "#d07000"
OBSERVED = "black"
PRIOR_DOMINATED = 0.5  # posterior std / prior std at or above which the data barely constrain a parameter
PRIOR_DRAWS = 20000
MAX_BAD_FRACTION = 0.05  # a timescale with more zero / non-finite samples than this is left out of the corner
CONTOUR_LEVELS = (1.0 - math.exp(-0.5), 1.0 - math.exp(-2.0))  # 1 and 2 sigma of a 2-D Gaussian

STAR_PLOTS = ("corner_parameters", "corner_timescales", "trace", "profile", "predictive")
CATALOG_PLOTS = ("hr_diagram", "timescales_vs_mass")

_SOLAR = {"M_sun": r"M_\odot", "R_sun": r"R_\odot", "L_sun": r"L_\odot"}


# ----------------------------------------------------------------------------- text helpers

def unit_tex(unit: str) -> str:
    """Mathtext (without dollars) of a unit string such as ``g / cm3`` or ``M_sun``."""
    unit = unit.strip()
    if not unit:
        return ""
    if unit in _SOLAR:
        return _SOLAR[unit]
    num, _, den = unit.partition("/")

    def tokens(part, sign):
        out = []
        for tok in part.split():
            m = re.fullmatch(r"([A-Za-z_]+)(\d*)", tok)
            if not m:
                out.append(rf"\mathrm{{{tok}}}")
                continue
            base, power = m.group(1), m.group(2)
            base = _SOLAR.get(base, rf"\mathrm{{{base}}}")
            exp = f"{sign}{power}" if power else ("-1" if sign else "")
            out.append(f"{base}^{{{exp}}}" if exp else base)
        return out

    return r"\,".join(tokens(num, "") + tokens(den, "-"))


def plain(text) -> str:
    """User text (star ids, law names, reasons) shown literally: a '$' must not start mathtext."""
    return str(text).replace("$", r"\$")


def axis_label(label: str, unit: str) -> str:
    """An axis label with its unit in brackets (kept as is when it already has one)."""
    if "[" in label or not unit:
        return label
    return f"{label}$\\,[{unit_tex(unit)}]$"


def _symbol(label: str) -> str:
    """The label without its bracketed unit."""
    out = re.sub(r"\\,\s*\[[^\]]*\]", "", label)
    return out.replace("$$", "") or label


def estimate_tex(lo: float, mid: float, hi: float) -> str:
    """``mid^{+(hi-mid)}_{-(mid-lo)}`` in mathtext, rounded to two significant digits of the error."""
    if not all(np.isfinite(v) for v in (lo, mid, hi)):
        return "n/a"
    minus, plus = max(mid - lo, 0.0), max(hi - mid, 0.0)
    exp = 0
    if mid != 0 and (abs(mid) >= 1e4 or abs(mid) < 1e-3):
        exp = int(math.floor(math.log10(abs(mid))))
    s = 10.0**exp
    err = min([e for e in (minus, plus) if e > 0], default=abs(mid) * 1e-3 or 1.0) / s
    dec = min(max(0, 1 - int(math.floor(math.log10(err)))), 6)
    core = f"{mid / s:.{dec}f}^{{+{plus / s:.{dec}f}}}_{{-{minus / s:.{dec}f}}}"
    return f"$({core})\\times10^{{{exp}}}$" if exp else f"${core}$"


def _value_tex(v: float, e: float) -> str:
    dec = 0 if not e > 0 else min(max(0, 1 - int(math.floor(math.log10(e)))), 6)
    return f"{v:.{dec}f} ± {e:.{dec}f}"


_PAD = 0.08  # inches between a figure's edge, its title and its notes
# Average advance of DejaVu Sans (matplotlib's default font) per character, in ems: about 0.55 for mixed
# text; a little more so that a line of digits or capitals still fits (checked by tests/report/test_figure_edges.py).
_EM_PER_CHAR = {False: 0.6, True: 0.67}


def wrap_text(text: str, width_in: float, fontsize: float, bold: bool = False) -> str:
    """``text`` wrapped to lines that fit ``width_in`` inches at ``fontsize`` points (each line on its own).

    Parameters
    ----------
    text : str
        Plain text or text with short mathtext pieces (each counted by its source length, which is longer
        than what it draws: a safe side).
    width_in : float, inch
        Room for a line.
    fontsize : float, pt
        Font size of the text.
    bold : bool
        Bold text is wider.

    Returns
    -------
    str
        The wrapped text; ``\n`` in ``text`` are kept.
    """
    chars = max(20, int(width_in * 72.0 / (fontsize * _EM_PER_CHAR[bold])))
    return "\n".join(textwrap.fill(line, chars, break_on_hyphens=False) if line else line
                     for line in text.split("\n"))


def _text_height(text: str, fontsize: float, spacing: float = 1.2) -> float:
    """Height in inches of ``text``'s lines at ``fontsize`` points (matplotlib's line spacing 1.2)."""
    return (text.count("\n") + 1) * fontsize * spacing / 72.0


def _place_grid(fig: Figure, nrows: int, ncols: int, left: float, right: float, bottom: float, top: float,
                wspace: float = 0.0, hspace: float = 0.0):
    """Places a figure's grid of axes with margins and gaps given in inches.

    Fixed margins instead of a layout engine: constrained layout measures every
    text of the figure at each save, twice, which was about half of the time of
    drawing the trace, profile and predictive figures (benchmarks/figure_cost.py).
    The margins are sized for the labels these figures draw.
    """
    width, height = fig.get_size_inches()
    axis_w = (width - left - right - (ncols - 1) * wspace) / ncols
    axis_h = (height - bottom - top - (nrows - 1) * hspace) / nrows
    fig.subplots_adjust(left=left / width, right=1 - right / width, bottom=bottom / height, top=1 - top / height,
                        wspace=wspace / axis_w, hspace=hspace / axis_h)


def _axes_width(ax) -> float:
    """Width of an axes in inches."""
    return ax.get_position().width * ax.figure.get_figwidth()


def _axes_height(ax) -> float:
    """Height of an axes in inches."""
    return ax.get_position().height * ax.figure.get_figheight()


def _note(fig: Figure, lines, y: float = 0.01):
    if lines:
        text = wrap_text("\n".join(lines), fig.get_figwidth() - 0.2, 8)
        fig.text(0.01, y, text, fontsize=8, color="0.3", ha="left", va="bottom")


# ----------------------------------------------------------------------------- corner plots

def prior_width_ratios(products: FitProducts) -> np.ndarray:
    """Posterior std over prior std of every fitted parameter (prior draws from ``default_rng(0)``)."""
    rng = np.random.default_rng(0)
    out = np.full(products.samples.shape[1], np.nan)
    for j, prior in enumerate(products.priors):
        width = float(np.std(prior.sample(rng, PRIOR_DRAWS)))
        if width > 0:
            out[j] = float(np.std(products.samples[:, j])) / width
    return out


def _ranges(data: np.ndarray):
    out = []
    for x in data.T:
        lo, hi = float(np.min(x)), float(np.max(x))
        if not hi > lo:  # a column without spread: give it a visible width
            pad = abs(lo) * 1e-3 or 1e-3
            lo, hi = lo - pad, hi + pad
        out.append([lo, hi])
    return out


def _corner_figure(data: np.ndarray, labels, ranges, truths=None):
    """Runs corner on a fresh Figure sized for it, with room above for a title block."""
    ndim = data.shape[1]
    factor = 2.1 if ndim > 1 else 3.2
    low, high, gap = 0.55 * factor, 0.2 * factor, 0.05
    plotdim = factor * ndim + factor * (ndim - 1) * gap
    width = low + plotdim + high
    top_room = 1.1 if ndim > 1 else 1.6
    fig = Figure(figsize=(width, width + top_room))
    bins = int(np.clip(np.sqrt(data.shape[0]) / 1.5, 12, 30))
    corner.corner(
        data, fig=fig, range=ranges, bins=bins, labels=labels, truths=truths, truth_color=MAP_COLOUR,
        color=POSTERIOR, quantiles=[0.16, 0.5, 0.84], show_titles=False, levels=CONTOUR_LEVELS,
        label_kwargs={"fontsize": 12}, max_n_ticks=4, use_math_text=False, labelpad=0.02, smooth=1.0,
    )
    height = width + top_room
    # corner placed the grid for a square figure; keep its inch margins with the extra top room
    fig.subplots_adjust(bottom=low / height, top=(low + plotdim) / height)
    axes = np.array(fig.axes).reshape(ndim, ndim)
    for ax in fig.axes:
        ax.tick_params(labelsize=9)
    return fig, axes, bins


def _corner_header(fig: Figure, title: str, handles, lines):
    """Title and notes in room above the grid, the figure grown to fit them; the legend in the empty
    upper-right triangle (below the notes when the grid is a single panel)."""
    width, height = fig.get_size_inches()
    bottom, grid_top = fig.subplotpars.bottom * height, fig.subplotpars.top * height
    title = wrap_text(title, width - 0.25, 12, bold=True)
    notes = wrap_text("\n".join(lines), width - 0.25, 8.5) if lines else ""
    title_h = _text_height(title, 12)
    notes_h = _text_height(notes, 8.5) if notes else 0.0
    single = len(fig.axes) == 1
    legend_h = _text_height("\n" * (len(handles) - 1), 9.5, spacing=1.7) + 0.1 if single and handles else 0.0
    # the diagonal panels' titles (an estimate with sub- and superscripts, maybe a second line) stand above
    # the grid's top row
    room = _PAD + title_h + _PAD + notes_h + legend_h + 0.55
    height = grid_top + room
    fig.set_size_inches(width, height)
    fig.subplots_adjust(bottom=bottom / height, top=grid_top / height)
    left = 0.1 / width
    y = 1 - _PAD / height
    fig.text(left, y, title, ha="left", va="top", fontsize=12, weight="bold")
    y -= (title_h + _PAD) / height
    if notes:
        fig.text(left, y, notes, ha="left", va="top", fontsize=8.5, color="0.3")
        y -= notes_h / height
    if handles:
        if single:
            fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(left, y), frameon=False, fontsize=9.5,
                       borderaxespad=0, borderpad=0.2)
        else:
            fig.legend(handles=handles, loc="upper right", frameon=False, fontsize=9.5,
                       bbox_to_anchor=(fig.subplotpars.right, fig.subplotpars.top))


def corner_parameters_figure(products: FitProducts) -> Figure:
    """Corner plot of the fitted parameters, MAP marked, priors overlaid where they dominate."""
    with matplotlib.rc_context(STYLE):
        data = np.asarray(products.samples, dtype=float)
        labels = [axis_label(lab, unit) for lab, unit in zip(products.param_labels, products.param_units)]
        ratios = prior_width_ratios(products)
        weak = ratios >= PRIOR_DOMINATED
        rng = np.random.default_rng(0)
        prior_draws = [p.sample(rng, PRIOR_DRAWS) for p in products.priors]
        ranges = _ranges(data)
        for j in np.flatnonzero(weak):  # show the prior's own extent where it is what the panel shows
            lo, hi = np.percentile(prior_draws[j], [0.5, 99.5])
            ranges[j] = [min(ranges[j][0], float(lo)), max(ranges[j][1], float(hi))]
        # columns after the chain's are drawn from their priors after sampling: they have no MAP
        sampled = len(products.chain.map_theta)
        truths = [float(v) for v in products.chain.map_theta] + [None] * (data.shape[1] - sampled)
        fig, axes, bins = _corner_figure(data, labels, ranges, truths=truths)
        n = data.shape[0]
        for j, lab in enumerate(products.param_labels):
            ax = axes[j, j]
            q = np.percentile(data[:, j], [16, 50, 84])
            unit = unit_tex(products.param_units[j])
            title = f"{_symbol(lab)} = {estimate_tex(*q)}" + (f" ${unit}$" if unit else "")
            if weak[j]:
                edges = np.linspace(ranges[j][0], ranges[j][1], bins + 1)
                counts, _ = np.histogram(prior_draws[j], bins=edges)
                scaled = counts * n / prior_draws[j].size
                ax.stairs(scaled, edges, color=PRIOR_COLOUR, ls="--", lw=1.3, gid="prior")
                ax.set_ylim(0, max(ax.get_ylim()[1], 1.1 * scaled.max()))
                title += "\nprior-dominated" if j < sampled else "\ndrawn from its prior"
            ax.set_title(title, fontsize=10.5, color=PRIOR_COLOUR if weak[j] else "black")
        handles = [
            Line2D([], [], color=POSTERIOR, label="posterior; dashed: 16, 50, 84 %"),
            Line2D([], [], color=MAP_COLOUR, label="maximum a posteriori"),
        ]
        if weak.any():
            handles.append(Line2D([], [], color=PRIOR_COLOUR, ls="--", label="prior (prior-dominated parameters)"))
        chain = products.chain
        lines = [
            f"{n} samples (burn-in {chain.burn}, thin {chain.thin}); contours: 1 and 2 sigma "
            "(39 % and 86 % of the 2-D mass)",
            "prior-dominated (orange titles, dashed prior): posterior std / prior std >= "
            f"{PRIOR_DOMINATED:g}; here " + ", ".join(
                f"{_symbol(lab)} {r:.2g}" for lab, r in zip(products.param_labels, ratios)),
        ]
        if data.shape[1] > sampled:
            lines.append("not sampled (the data do not reach them): "
                         + ", ".join(_symbol(lab) for lab in products.param_labels[sampled:])
                         + ", drawn from their priors after sampling")
        title = f"{plain(products.star.id)}: parameters (opacity {plain(products.opacity)})"
        _corner_header(fig, title, handles, lines)
    return fig


def timescale_columns(products: FitProducts):
    """The log10 timescale columns fit for a corner plot.

    Returns
    -------
    names : list of str
        Kept timescales (from ``radwalk.forward.quantities.TIMESCALES``).
    data : ndarray, shape [N, len(names)]
        log10 of the timescales in their output units (yr, or s for the dynamical time).
    notes : list of str
        Why a timescale or some samples were left out.
    """
    notes, cols, names = [], [], []
    for name in TIMESCALES:
        sym = latex_symbol(name)
        if name not in products.derived:
            notes.append(f"{sym}: not computed")
            continue
        v = np.asarray(products.derived[name], dtype=float)
        good = np.isfinite(v) & (v > 0)
        bad = 1.0 - good.mean() if v.size else 1.0
        if bad > MAX_BAD_FRACTION:
            zero = float(np.mean(v == 0)) if v.size else 0.0
            why = (" (no radiative zone in those models)" if name == "diffusion_time_radiative_core" and zero > 0
                   else "")
            notes.append(f"{sym} left out: zero or non-finite in {100 * bad:.0f} % of samples{why}")
            continue
        names.append(name)
        cols.append(v)
    if not cols:
        return [], np.empty((0, 0)), notes
    data = np.column_stack(cols)
    ok = np.all(np.isfinite(data) & (data > 0), axis=1)
    if not ok.all():
        notes.append(f"{int((~ok).sum())} samples with a zero or non-finite timescale left out")
    with np.errstate(divide="ignore", invalid="ignore"):
        logs = np.log10(data[ok])
    keep = []
    for j, name in enumerate(names):
        sym = latex_symbol(name)
        x = logs[:, j]
        if x.size < 2 or np.ptp(x) <= 1e-10 * max(1.0, float(np.max(np.abs(x)))):
            value = f"{10 ** x[0]:.3g} {output_unit(name)}" if x.size else "n/a"
            notes.append(f"{sym} left out: constant ({value})")
            continue
        if name == "diffusion_time_radiative_core" and "diffusion_time" in names:
            i = names.index("diffusion_time")
            if np.allclose(x, logs[:, i], rtol=0, atol=1e-9):
                notes.append(f"{sym} left out: equal to " + latex_symbol("diffusion_time")
                             + " (no convective layers)")
                continue
        keep.append(j)
    return [names[j] for j in keep], logs[:, keep], notes


def corner_timescales_figure(products: FitProducts) -> Figure:
    """Corner plot of log10 of the photon diffusion, Kelvin-Helmholtz and dynamical times."""
    with matplotlib.rc_context(STYLE):
        names, data, notes = timescale_columns(products)
        title = f"{plain(products.star.id)}: transport timescales (opacity {plain(products.opacity)})"
        if not names:
            fig = Figure(figsize=(6, 4), layout="constrained")
            ax = fig.add_subplot()
            ax.set_axis_off()
            ax.text(0.5, 0.6, "no timescale has a spread to show", ha="center", fontsize=12)
            ax.set_title(wrap_text(title, fig.get_figwidth() - 0.3, STYLE["axes.titlesize"]))
            _note(fig, notes)
            return fig
        labels = [r"$\log_{10}$ " + latex_label(nm) for nm in names]
        fig, axes, _ = _corner_figure(data, labels, _ranges(data))
        for j, nm in enumerate(names):
            q = np.percentile(10 ** data[:, j], [16, 50, 84])
            unit = unit_tex(output_unit(nm))
            axes[j, j].set_title(f"{latex_symbol(nm)} = {estimate_tex(*q)} ${unit}$", fontsize=10.5)
        handles = [Line2D([], [], color=POSTERIOR, label="posterior; dashed: 16, 50, 84 %")]
        lines = [f"{data.shape[0]} samples; contours: 1 and 2 sigma (39 % and 86 % of the 2-D mass)"] + notes
        _corner_header(fig, title, handles, lines)
    return fig


# ----------------------------------------------------------------------------- sampler trace

def _walker_paths(x: np.ndarray, y: np.ndarray) -> LineCollection:
    """One artist for every walker's path (y [steps, walkers]): one draw call instead of one Line2D each."""
    segs = np.empty((y.shape[1], x.size, 2))
    segs[:, :, 0] = x
    segs[:, :, 1] = y.T
    return LineCollection(segs, colors=POSTERIOR, linewidths=0.45, alpha=0.35, gid="walkers")


def _mark_burn_in(ax, burn: int):
    ax.axvspan(0, burn, color="0.88", zorder=0, lw=0)
    ax.axvline(burn, color=MAP_COLOUR, ls="--", lw=1.2, gid="burn-in")


def _log_prob_limits(lp: np.ndarray, burn: int, best: float = -np.inf):
    """y-limits of the log-probability panel: every step after burn-in, the top of all and ``best`` (the MAP).

    The walkers start near the MAP but may wander far down during burn-in;
    those excursions would squeeze the sampled range into a line, so they may
    run off the bottom of the panel (the figure says so).

    Parameters
    ----------
    lp : ndarray [steps, walkers]
        The walkers' log posterior.
    burn : int
        Burn-in steps.
    best : float
        The MAP's log posterior (kept inside the panel).

    Returns
    -------
    (float, float) or None
        The limits; None when no value is finite.
    bool
        Whether some (burn-in) values lie below the panel.
    """
    after = lp[burn:][np.isfinite(lp[burn:])]
    finite = lp[np.isfinite(lp)]
    if finite.size == 0:
        return None, False
    top = max(float(finite.max()), best if np.isfinite(best) else -np.inf)
    bottom = float(after.min()) if after.size else float(finite.min())
    pad = 0.06 * (top - bottom) if top > bottom else 1.0
    lo, hi = bottom - pad, top + pad
    return (lo, hi), bool(np.any(finite < lo))


def trace_figure(products: FitProducts) -> Figure:
    """Every walker's path per parameter and its log-probability, burn-in shaded and marked."""
    with matplotlib.rc_context(STYLE):
        chain = products.chain
        steps, walkers, ndim = chain.chain.shape
        fig = Figure(figsize=(9.5, 1.55 * (ndim + 1) + 1.3))
        axes = fig.subplots(ndim + 1, 1, sharex=True, squeeze=False)[:, 0]
        stride = max(1, steps // 3000)  # Agg draws a few thousand points per walker quickly
        x = np.arange(0, steps, stride)
        labels = [axis_label(lab, unit) for lab, unit in zip(products.param_labels, products.param_units)]
        for j, ax in enumerate(axes[:ndim]):
            ax.add_collection(_walker_paths(x, chain.chain[::stride, :, j]), autolim=True)
            ax.autoscale_view()
            _mark_burn_in(ax, chain.burn)
            ax.set_ylabel(labels[j])
            ax.text(0.995, 0.94, f"τ = {chain.tau[j]:.1f} steps", transform=ax.transAxes, ha="right",
                    va="top", fontsize=8.5, bbox={"fc": "white", "ec": "none", "alpha": 0.8, "pad": 1.5})
        ax = axes[-1]
        lp = np.asarray(chain.log_prob, dtype=float)
        ax.add_collection(_walker_paths(x, lp[::stride]), autolim=False)
        _mark_burn_in(ax, chain.burn)
        if np.isfinite(chain.map_log_prob):
            ax.axhline(chain.map_log_prob, color=MAP_COLOUR, lw=1.0, ls=":", gid="map-log-prob")
        limits, below = _log_prob_limits(lp, chain.burn, float(chain.map_log_prob))
        if limits is not None:
            ax.set_ylim(*limits)
        ax.set_ylabel("log posterior")
        note = "dotted: maximum a posteriori" + ("; lower burn-in values off scale" if below else "")
        ax.text(0.995, 0.06, note, transform=ax.transAxes, ha="right", va="bottom", fontsize=8.5,
                bbox={"fc": "white", "ec": "none", "alpha": 0.8, "pad": 1.5})
        axes[0].text(0.5 * chain.burn, 0.94, "burn-in", transform=axes[0].get_xaxis_transform(), ha="center",
                     va="top", fontsize=8.5, color="0.3")
        axes[-1].set_xlabel("step")
        axes[-1].set_xlim(0, max(steps - 1, 1))
        state = "converged" if chain.converged else "NOT converged"
        head = (f"{plain(products.star.id)}: {walkers} walkers × {steps} steps, burn-in {chain.burn}, "
                f"thin {chain.thin}, acceptance {chain.acceptance:.2f}, "
                f"max τ = {np.max(chain.tau):.1f} steps: {state}")
        if not chain.converged and chain.reason:
            head += "\n" + plain(chain.reason)
        drawn = products.param_labels[ndim:]
        if drawn:  # parameters the likelihood never sees are drawn from their priors, not walked
            head += "\nnot sampled (drawn from their priors afterwards): " + ", ".join(_symbol(x) for x in drawn)
        head = wrap_text(head, fig.get_figwidth() - 0.3, 10.5)
        fig.suptitle(head, fontsize=10.5, color="black" if chain.converged else MAP_COLOUR,
                     y=1 - 0.08 / fig.get_figheight())
        _place_grid(fig, ndim + 1, 1, left=0.85, right=0.12, bottom=0.5, top=0.2 + _text_height(head, 10.5),
                    hspace=0.1)
    return fig


# ----------------------------------------------------------------------------- radial profile

PROFILE_PANELS = (
    ("rho", "density", r"$\rho\,[\mathrm{g\,cm^{-3}}]$", True),
    ("T", "temperature", r"$T\,[\mathrm{K}]$", True),
    ("kappa", "Rosseland-mean opacity", r"$\kappa\,[\mathrm{cm^{2}\,g^{-1}}]$", True),
    ("mean_free_path", "photon mean free path", r"$\lambda = 1/(\kappa\rho)\,[\mathrm{cm}]$", True),
    ("diffusion_time_cumulative", "cumulative photon diffusion time",
     r"$t_\mathrm{diff}(<r)\,[\mathrm{yr}]$", False),
)


SURFACE_CUT = 0.999  # r/R beyond which log-axis limits ignore the profile (see profile_figure)
CONVECTIVE = "#e8a33d"
# Shading of convective layers: (row of the "convective" band, alpha, legend words).  Row 50 % >= 0.5 where
# most samples are convective, row 97.5 % >= 0.5 where at least 2.5 % of them are.
CONVECTIVE_SHADES = ((97.5, 0.12, "convective in some samples (> 2.5 %)"),
                     (50.0, 0.30, "convective in most samples (> 50 %)"))


def convective_spans(row: np.ndarray, r: np.ndarray) -> list[tuple[float, float]]:
    """(r/R from, to) of the runs of layers where a band row of the "convective" field is >= 0.5.

    Parameters
    ----------
    row : ndarray [g]
        One percentile row of the band (0 radiative, 1 convective; in between at a boundary).
    r : ndarray [g]
        r/R of the layers.

    Returns
    -------
    list of (float, float)
        Each run from halfway to its inner neighbour to halfway to its outer one (the ends at the centre and
        the surface themselves).
    """
    conv = np.asarray(row, dtype=float) >= 0.5
    if not conv.any():
        return []
    mid = np.concatenate([[r[0]], 0.5 * (r[1:] + r[:-1]), [r[-1]]])
    edges = np.flatnonzero(np.diff(np.concatenate([[0], conv.astype(int), [0]])))
    return [(float(mid[a]), float(mid[b])) for a, b in zip(edges[::2], edges[1::2])]


def _shade_convection(ax, band, r) -> list:
    """Shades the convective layers of one panel; returns the legend handles of the shades drawn."""
    handles = []
    for pct, alpha, words in CONVECTIVE_SHADES:
        spans = convective_spans(band[BAND_PERCENTILES.index(pct)], r)
        for lo, hi in spans:
            ax.axvspan(lo, hi, color=CONVECTIVE, alpha=alpha, lw=0, zorder=0, gid="convective")
        if spans:
            handles.append(Patch(color=CONVECTIVE, alpha=alpha, lw=0, label=words))
    return handles


def _log_limits(band: np.ndarray, r: np.ndarray):
    """y-limits of a log panel from the layers inside SURFACE_CUT, padded by a quarter decade.

    A polytrope's density and temperature fall to zero at r = R, far below
    the photospheric values, and the outermost 0.1 % of the radius would set
    tens of decades of an axis; those points run off the panel instead.
    """
    inner = band[:, r <= SURFACE_CUT]
    vals = inner[np.isfinite(inner) & (inner > 0)]
    if vals.size == 0:
        return None
    lo, hi = np.log10(vals.min()), np.log10(vals.max())
    return 10 ** (lo - 0.25), 10 ** (hi + 0.25)


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def power_of_ten(value: float, _pos=None) -> str:
    """``10ⁿ`` in plain text (Unicode superscripts) for a power of ten, "" for any other tick value."""
    if not value > 0:
        return ""
    exp = round(math.log10(value))
    return f"10{str(exp).translate(_SUPERSCRIPT)}" if math.isclose(value, 10.0**exp, rel_tol=1e-9) else ""


def _decade_ticks(axis):
    """Ticks of a log axis spanning two decades or more: labelled decades and a plain minor tick at the others.

    matplotlib's default draws eight minor ticks per decade (about 230 Tick
    objects over the profile's four log panels, a fifth of its time) and
    writes each label as mathtext (a parse per distinct label); a decade
    label in Unicode superscripts reads the same.  Shorter spans keep the
    default ticks, whose labels need the mantissas.
    """
    lo, hi = sorted(axis.get_view_interval())
    if not (lo > 0 and hi / lo >= 100.0):
        return
    axis.set_major_locator(LogLocator(base=10.0, numticks=8))
    axis.set_major_formatter(FuncFormatter(power_of_ten))
    axis.set_minor_locator(LogLocator(base=10.0, subs=(1.0,), numticks=60))
    axis.set_minor_formatter(NullFormatter())


def profile_figure(products: FitProducts) -> Figure:
    """Radial profiles with 68 % and 95 % credible bands over the posterior samples."""
    lo95, lo68, mid, hi68, hi95 = (BAND_PERCENTILES.index(p) for p in (2.5, 16.0, 50.0, 84.0, 97.5))
    products.ensure_bands()  # a track-grid fit solves its band stars only now
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(10, 10.5))
        grid = fig.subplots(3, 2, sharex=True)
        head = wrap_text(f"{plain(products.star.id)}: interior profile", fig.get_figwidth() - 0.3, 12)
        _place_grid(fig, 3, 2, left=0.85, right=0.12, bottom=0.5, top=0.4 + _text_height(head, 12), wspace=0.95,
                    hspace=0.62)
        r = np.asarray(products.r_rel, dtype=float)
        convective = products.bands.get("convective")
        shades = []
        for (key, title, ylabel, log), ax in zip(PROFILE_PANELS, grid.flat):
            if convective is not None:
                shades = _shade_convection(ax, np.asarray(convective, dtype=float), r)
            band = np.array(products.bands[key], dtype=float)
            lim = None
            if log:
                band[~(band > 0)] = np.nan  # a log axis cannot show the zero at the surface
                ax.set_yscale("log")
                lim = _log_limits(band, r)
            ax.fill_between(r, band[lo95], band[hi95], color=POSTERIOR, alpha=0.18, lw=0)
            ax.fill_between(r, band[lo68], band[hi68], color=POSTERIOR, alpha=0.38, lw=0)
            ax.plot(r, band[mid], color=POSTERIOR, lw=1.4)
            ax.set_title(title)
            ax.set_ylabel(ylabel)
            ax.set_xlim(0, 1)
            ax.grid(alpha=0.25, lw=0.5)
            if log and lim is not None:
                ax.set_ylim(*lim)
                _decade_ticks(ax.yaxis)
                if np.nanmin(band[:, r > SURFACE_CUT], initial=np.inf) < lim[0] or \
                        np.nanmax(band[:, r > SURFACE_CUT], initial=-np.inf) > lim[1]:
                    ax.text(0.99, 0.02, f"off scale beyond r/R = {SURFACE_CUT:g}", transform=ax.transAxes,
                            ha="right", va="bottom", fontsize=7.5, color="0.35")
            if not log:
                ax.ticklabel_format(axis="y", style="sci", scilimits=(-3, 4), useMathText=True)
        for ax in (grid[-1, 0], grid[-2, 1]):  # the bottom panel of each column carries the r/R axis
            ax.xaxis.set_tick_params(labelbottom=True)
            ax.set_xlabel(r"$r/R$")
        info = grid.flat[-1]
        info.set_axis_off()
        handles = [Patch(color=POSTERIOR, alpha=0.38, lw=0, label="68 % credible band"),
                   Patch(color=POSTERIOR, alpha=0.18, lw=0, label="95 % credible band"),
                   Line2D([], [], color=POSTERIOR, lw=1.4, label="median")] + shades
        info.legend(handles=handles, loc="upper left", frameon=False, fontsize=10)
        zones = ("convective zones: none in any sample" if convective is not None and not shades
                 else "" if convective is not None else "convective zones: not recorded")
        text = (wrap_text(f"star {plain(products.star.id)}\nopacity law: {plain(products.opacity)}",
                          _axes_width(info), 10) + "\n"
                # a profile model that solves its interiors does so for a few evenly spaced samples only, so the
                # number of samples behind the bands is not that of the derived quantities: none is given
                "bands over the posterior samples\n"
                + (f"{zones}\n" if zones else "")
                + r"$t_\mathrm{diff}(<r) = c^{-1}\int_0^r \kappa\rho\, r'\,\mathrm{d}r'$")
        info.text(0.0, 0.45, text, transform=info.transAxes, va="top", fontsize=10)
        fig.suptitle(head, fontsize=12, y=1 - _PAD / fig.get_figheight(), va="top")
    return fig


# ----------------------------------------------------------------------------- predictive check

PREDICTIVE = (("radius", "radius"), ("luminosity", "luminosity"), ("teff", "effective temperature"))


def predictive_figure(products: FitProducts) -> Figure:
    """Posterior-predictive R, L and T_eff against the observations (or 'not measured')."""
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(12, 4.2))
        axes = fig.subplots(1, len(PREDICTIVE), squeeze=False)[0]
        head = wrap_text(f"{plain(products.star.id)}: posterior-predictive check (opacity {plain(products.opacity)})",
                         fig.get_figwidth() - 0.3, 12)
        extra = _text_height(head, 12) - _text_height("", 12)
        fig.set_size_inches(12, 4.2 + extra)
        _place_grid(fig, 1, len(PREDICTIVE), left=0.7, right=0.35, bottom=0.85, top=0.7 + extra, wspace=0.75)
        for (key, title), ax in zip(PREDICTIVE, axes):
            pred = np.asarray(products.derived.get(key, []), dtype=float)
            pred = pred[np.isfinite(pred)]
            value, err = (float(x) for x in products.observed.get(key, (np.nan, np.nan)))
            measured = np.isfinite(value) and np.isfinite(err)
            ax.set_xlabel(latex_label(key))
            ax.set_ylabel("samples")
            if pred.size:
                ax.hist(pred, bins=int(np.clip(np.sqrt(pred.size), 10, 40)), color=POSTERIOR, alpha=0.55,
                        label="posterior predictive")
            else:
                ax.text(0.5, 0.5, "no finite prediction", transform=ax.transAxes, ha="center")
            unit = unit_tex(output_unit(key))
            if measured:
                ax.axvspan(value - err, value + err, color="0.5", alpha=0.22, lw=0, label="observed ±1σ")
                ax.axvline(value, color=OBSERVED, lw=1.6, label="observed")
                ax.set_title(f"{title}: observed {_value_tex(value, err)} ${unit}$")
                if pred.size:
                    z = (np.median(pred) - value) / err
                    ax.text(0.02, 0.96, f"median - observed = {z:+.2f} σ", transform=ax.transAxes,
                            ha="left", va="top", fontsize=9)
            else:
                ax.set_title(f"{title}: not measured")
                ax.text(0.02, 0.96, "not measured\n(prediction only)", transform=ax.transAxes, ha="left",
                        va="top", fontsize=10, color=MAP_COLOUR, gid="not-measured")
            ax.set_ylim(0, ax.get_ylim()[1] * 1.18)  # room for the text at the top
        handles = [Patch(color=POSTERIOR, alpha=0.55, label="posterior predictive"),
                   Line2D([], [], color=OBSERVED, lw=1.6, label="observed"),
                   Patch(color="0.5", alpha=0.22, label="observed ±1σ")]
        fig.legend(handles=handles, loc="lower center", bbox_to_anchor=(0.5, 0.0), ncols=3, frameon=False)
        fig.suptitle(head, fontsize=12, y=1 - _PAD / fig.get_figheight(), va="top")
    return fig


# ----------------------------------------------------------------------------- opacity comparison

def _mass_samples(products: FitProducts):
    names = list(products.chain.names)
    if "mass" in names:
        return np.asarray(products.samples[:, names.index("mass")], dtype=float)
    return None


def opacity_comparison_figure(comparison: dict) -> Figure:
    """Mass and photon diffusion time under each opacity law, overlaid."""
    with matplotlib.rc_context(STYLE):
        some = next(iter(comparison.values()))
        head = wrap_text(f"{plain(some.star.id)}: the same star under {len(comparison)} opacity laws", 11 - 0.3, 12)
        extra = _text_height(head, 12) - _text_height("", 12)
        # the legends go under the panels, one row per law: over the histograms they hid the data
        legend_h = _text_height("\n" * len(comparison), 9, spacing=1.45) + 0.1
        fig = Figure(figsize=(11, 4.4 + extra + legend_h))
        ax_m, ax_t = fig.subplots(1, 2)
        _place_grid(fig, 1, 2, left=0.75, right=0.2, bottom=0.6 + legend_h, top=0.75 + extra, wspace=0.85)
        below = {"loc": "upper center", "bbox_to_anchor": (0.5, -0.5 / _axes_height(ax_m)), "frameon": False,
                 "borderaxespad": 0.0}
        masses = {op: _mass_samples(p) for op, p in comparison.items()}
        times = {}
        for op, p in comparison.items():
            t = np.asarray(p.derived.get("diffusion_time", []), dtype=float)
            times[op] = t[np.isfinite(t) & (t > 0)]
        finite_m = [m[np.isfinite(m)] for m in masses.values() if m is not None]
        # bins the smallest sample can fill: a short comparison fit must not look like noise
        sizes = [t.size for t in times.values() if t.size] + [m.size for m in finite_m if m.size]
        nbins = int(np.clip(np.sqrt(min(sizes, default=100)) * 1.2, 8, 35))
        if finite_m and np.concatenate(finite_m).size:
            allm = np.concatenate(finite_m)
            top = allm.max() if allm.max() > allm.min() else allm.min() * 1.001 + 1e-9
            edges = np.linspace(allm.min(), top, nbins + 1)
            for i, (op, m) in enumerate(masses.items()):
                if m is None or not np.isfinite(m).any():
                    continue
                m = m[np.isfinite(m)]
                q = np.percentile(m, [16, 50, 84])
                ax_m.hist(m, bins=edges, density=True, histtype="step", lw=1.6, color=f"C{i}",
                          label=f"{plain(op)}: {estimate_tex(*q)}")
                ax_m.axvline(q[1], color=f"C{i}", ls=":", lw=1)
            ax_m.legend(title="opacity law (median, 16-84 %)", **below)
        else:
            ax_m.text(0.5, 0.5, "mass not fitted", transform=ax_m.transAxes, ha="center")
        ax_m.set_xlabel(r"$M\,[M_\odot]$")
        ax_m.set_ylabel("probability density")
        ax_m.set_title("stellar mass")
        allt = np.concatenate([t for t in times.values()]) if times else np.empty(0)
        if allt.size:
            lo, hi = np.log10(allt.min()), np.log10(allt.max())
            if not hi > lo:
                lo, hi = lo - 0.01, hi + 0.01
            edges = np.logspace(lo, hi, nbins + 1)
            for i, (op, t) in enumerate(times.items()):
                if not t.size:
                    continue
                q = np.percentile(t, [16, 50, 84])
                # per dex, so that the log-spaced bins do not distort the shape
                ax_t.hist(t, bins=edges, weights=np.full(t.size, 1.0 / (t.size * (hi - lo) / (edges.size - 1))),
                          histtype="step", lw=1.6, color=f"C{i}", label=f"{plain(op)}: {estimate_tex(*q)} yr")
                ax_t.axvline(q[1], color=f"C{i}", ls=":", lw=1)
            ax_t.set_xscale("log")
            ax_t.legend(title="opacity law (median, 16-84 %)", **below)
        else:
            ax_t.text(0.5, 0.5, "no finite diffusion time", transform=ax_t.transAxes, ha="center")
        ax_t.set_xlabel(latex_label("diffusion_time"))
        ax_t.set_ylabel(r"probability per dex")
        ax_t.set_title("photon diffusion time, centre to surface")
        fig.suptitle(head, fontsize=12, y=1 - _PAD / fig.get_figheight(), va="top")
    return fig


# ----------------------------------------------------------------------------- per-star entry points

def star_figures(products: FitProducts, comparison: dict | None = None) -> dict:
    """All figures of one star, not saved.

    Parameters
    ----------
    products : FitProducts
        The fitted star.
    comparison : dict of str to FitProducts, optional
        The same star under several opacity laws; adds ``opacity_comparison``
        when it has two or more entries.

    Returns
    -------
    dict
        {kind: Figure}, kinds as in the file names without ``.png``.
    """
    figs = {kind: builder(products) for kind, builder in _star_builders()}
    if comparison is not None and len(comparison) > 1:
        figs["opacity_comparison"] = opacity_comparison_figure(comparison)
    return figs


def _star_builders():
    return (("corner_parameters", corner_parameters_figure), ("corner_timescales", corner_timescales_figure),
            ("trace", trace_figure), ("profile", profile_figure), ("predictive", predictive_figure))


def save_figure(fig: Figure, path) -> Path:
    """Writes ``fig`` as PNG to ``path`` atomically."""
    path = Path(path)
    with matplotlib.rc_context(STYLE), atomic_path(path) as tmp:
        # zlib level 1: the trace's PNG was a fifth of its time at the default level 6, for files 2-7 % smaller
        fig.savefig(tmp, dpi=DPI, format="png", facecolor="white", pil_kwargs={"compress_level": 1})
        # the temporary file is created private (0600); a report's images must be readable by a web server
        os.chmod(tmp, 0o644)
    return path


def write_star_plots(products: FitProducts, folder, comparison: dict | None = None) -> dict:
    """Writes the star's PNGs into ``folder``.

    Parameters
    ----------
    products : FitProducts
        The fitted star (the primary opacity law).
    folder : str or Path
        The star's output folder.
    comparison : dict of str to FitProducts, optional
        The same star under several opacity laws (name -> products); with two
        or more entries ``opacity_comparison.png`` is written too.

    Returns
    -------
    dict
        {kind: file name relative to ``folder``}.
    """
    folder = Path(folder)
    out = {}
    builders = list(_star_builders())
    if comparison is not None and len(comparison) > 1:
        builders.append(("opacity_comparison", lambda _p: opacity_comparison_figure(comparison)))
    for kind, builder in builders:  # one figure alive at a time
        name = f"{kind}.png"
        save_figure(builder(products), folder / name)
        out[kind] = name
    return out


# ----------------------------------------------------------------------------- catalog plots

def _num(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def _observed(s: dict, key: str):
    d = (s.get("observed") or {}).get(key) or {}
    if isinstance(d, (list, tuple)):
        return _num(d[0]), _num(d[1])
    return _num(d.get("value")), _num(d.get("error"))


def _quantiles(s: dict, section: str, key: str):
    d = (s.get(section) or {}).get(key) or {}
    return tuple(_num(d.get(q)) for q in ("p16", "p50", "p84"))


def _mass_quantiles(s: dict):
    q = _quantiles(s, "parameters", "mass")
    if not np.isfinite(q[1]):
        m = _num((s.get("fixed") or {}).get("mass"))
        q = (m, m, m)
    return q


def _log_bars(q):
    """log10 of a (p16, p50, p84) triple as centre and [lower, upper] error lengths."""
    lo, mid, hi = q
    c = math.log10(mid)
    down = c - math.log10(lo) if lo > 0 else 0.0
    up = math.log10(hi) - c if hi > 0 else 0.0
    return c, max(down, 0.0), max(up, 0.0)


def _empty(ax, text):
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center", fontsize=12, color="0.3")


def _ensure_span(lim, span):
    lo, hi = sorted(lim)
    if hi - lo < span:
        c = 0.5 * (lo + hi)
        lo, hi = c - span / 2, c + span / 2
    return lo, hi


def hr_diagram_figure(summaries: list) -> Figure:
    """HR diagram of a catalog: observed positions and posterior-predictive positions."""
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(7.5, 6.5), layout="constrained")
        ax = fig.add_subplot()
        obs_ok, obs_failed, pred_ok, pred_nc, links = [], [], [], [], []
        no_teff = 0
        for s in summaries:
            status = s.get("status", "ok")
            t, te = _observed(s, "teff")
            lum, le = _observed(s, "luminosity")
            has_obs = np.isfinite(t) and np.isfinite(lum) and t > 0 and lum > 0
            if has_obs:
                x, xe = math.log10(t), (te / (t * math.log(10)) if np.isfinite(te) else 0.0)
                y, ye = math.log10(lum), (le / (lum * math.log(10)) if np.isfinite(le) else 0.0)
                (obs_failed if status == "failed" else obs_ok).append((x, y, xe, ye))
            elif status != "failed":
                no_teff += 1
            qt, ql = _quantiles(s, "derived", "teff"), _quantiles(s, "derived", "luminosity")
            if status != "failed" and qt[1] > 0 and ql[1] > 0:
                px, pxl, pxh = _log_bars(qt)
                py, pyl, pyh = _log_bars(ql)
                (pred_ok if status == "ok" else pred_nc).append((px, py, pxl, pxh, pyl, pyh))
                if has_obs:
                    links.append(((x, px), (y, py)))
        for xs, ys in links:
            ax.plot(xs, ys, color="0.6", lw=0.6, zorder=1)
        if obs_ok:
            a = np.array(obs_ok)
            ax.errorbar(a[:, 0], a[:, 1], xerr=a[:, 2], yerr=a[:, 3], fmt="o", ms=5, color=OBSERVED, lw=1,
                        capsize=2, label="observed", zorder=3)
        for rows, face, label in ((pred_ok, POSTERIOR, "posterior predictive (median, 16-84 %)"),
                                  (pred_nc, "white", "posterior predictive, not converged")):
            if rows:
                a = np.array(rows)
                ax.errorbar(a[:, 0], a[:, 1], xerr=[a[:, 2], a[:, 3]], yerr=[a[:, 4], a[:, 5]], fmt="s", ms=5,
                            color=POSTERIOR, mfc=face, lw=1, capsize=2, label=label, zorder=4)
        if obs_failed:
            a = np.array(obs_failed)
            ax.errorbar(a[:, 0], a[:, 1], xerr=a[:, 2], yerr=a[:, 3], fmt="X", ms=8, color=MAP_COLOUR, lw=1,
                        capsize=2, label="failed fit (observed)", zorder=5)
        ax.set_xlabel(r"$\log_{10}\,T_\mathrm{eff}\,[\mathrm{K}]$")
        ax.set_ylabel(r"$\log_{10}\,L\,[L_\odot]$")
        title = f"HR diagram: {len(summaries)} star{'s' if len(summaries) != 1 else ''}"
        if no_teff:
            title += f"\n({no_teff} without a measured " + r"$T_\mathrm{eff}$: predicted position only)"
        ax.set_title(title)
        if not (obs_ok or obs_failed or pred_ok or pred_nc):
            _empty(ax, "no star with a position to show")
            ax.set_xlim(4.2, 3.4)
            ax.set_ylim(-2, 3)
            return fig
        xlim = _ensure_span(ax.get_xlim(), 0.15)
        ylim = _ensure_span(ax.get_ylim(), 0.8)
        _radius_lines(ax, xlim, ylim)
        ax.set_xlim(xlim[1], xlim[0])  # hot stars on the left
        ax.set_ylim(*ylim)
        ax.legend(loc="best", frameon=True, framealpha=0.9)
    return fig


def _radius_lines(ax, xlim, ylim):
    """Dashed lines of constant radius, L = 4 pi R^2 sigma T^4, labelled in R_sun."""
    x = np.linspace(xlim[0], xlim[1], 50)
    lo_r = math.floor((ylim[0] - 4 * (xlim[1] - math.log10(k.TEFF_SUN))) / 2)
    hi_r = math.ceil((ylim[1] - 4 * (xlim[0] - math.log10(k.TEFF_SUN))) / 2)
    for lr in range(lo_r, hi_r + 1):
        y = 2 * lr + 4 * (x - math.log10(k.TEFF_SUN))
        inside = (y >= ylim[0]) & (y <= ylim[1])
        if not inside.any():
            continue
        ax.plot(x, y, color="0.75", ls="--", lw=0.7, zorder=0)
        i = np.flatnonzero(inside)[len(np.flatnonzero(inside)) // 2]
        ax.text(x[i], y[i], f"{10.0 ** lr:g} " + r"$R_\odot$", fontsize=7.5, color="0.5", ha="center",
                va="bottom", rotation=0, zorder=0)


def _readable_log_axis(axis, min_factor: float):
    """A log axis spanning at least ``min_factor``, with plain tick labels when it spans little."""
    lo, hi = sorted(axis.get_view_interval())
    if hi / lo < min_factor:
        c = math.sqrt(lo * hi)
        lo, hi = c / math.sqrt(min_factor), c * math.sqrt(min_factor)
    if axis is axis.axes.xaxis:
        axis.axes.set_xlim(lo, hi)
    else:
        axis.axes.set_ylim(lo, hi)
    if hi / lo < 300:  # under about 2.5 decades: label 1-2-5 (or every) step as plain numbers
        subs = np.arange(1.0, 10.0) if hi / lo < 8 else (1.0, 2.0, 5.0)
        axis.set_major_locator(LogLocator(subs=subs))
        axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
        axis.set_minor_formatter(NullFormatter())


# The timescales of the catalog plot: name -> (marker, colour, legend words).  A quantity a star's model
# does not give (no main-sequence lifetime for a polytrope) is simply not drawn for it.
CATALOG_TIMESCALES = {
    "diffusion_time": ("o", "C0", r"photon diffusion time $t_\mathrm{diff}$"),
    "energy_transport_time": ("s", "C2", r"energy-transport time $t_\mathrm{th} = U/L$"),
    "kelvin_helmholtz_time": ("D", "C3", r"Kelvin–Helmholtz time $t_\mathrm{KH}$"),
    "main_sequence_lifetime": ("^", "C1", r"main-sequence lifetime $t_\mathrm{MS}$"),
}


def _quantiles_in_years(s: dict, key: str):
    """(p16, p50, p84) of a derived timescale in yr, converted from the unit summary.json gives it in."""
    q = _quantiles(s, "derived", key)
    unit = ((s.get("derived") or {}).get(key) or {}).get("unit") or "yr"
    if unit == "yr":
        return q
    try:
        import astropy.units as u

        factor = float(u.Unit(unit).to(u.yr))
    except (ValueError, u.UnitsError):
        return (float("nan"),) * 3  # not a time: nothing to draw
    return tuple(v * factor for v in q)


def timescales_vs_mass_figure(summaries: list) -> Figure:
    """Photon diffusion, energy-transport and Kelvin-Helmholtz times and the main-sequence lifetime
    (median, 16-84 %) against the fitted mass, each where the stars' model gives it."""
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(7.5, 6), layout="constrained")
        ax = fig.add_subplot()
        series = {key: ([], *style) for key, style in CATALOG_TIMESCALES.items()}
        shown = 0
        few = len(summaries) <= 8
        for s in summaries:
            if s.get("status") == "failed":
                continue
            qm = _mass_quantiles(s)
            if not qm[1] > 0:
                continue
            used = False
            for key, (rows, *_rest) in series.items():
                qt = _quantiles_in_years(s, key)
                if not qt[1] > 0:
                    continue
                rows.append((qm[1], max(qm[1] - qm[0], 0.0), max(qm[2] - qm[1], 0.0), qt[1],
                             min(max(qt[1] - qt[0], 0.0), 0.999 * qt[1]), max(qt[2] - qt[1], 0.0),
                             s.get("status") == "ok"))
                used = True
                if few and key == "diffusion_time":
                    ax.annotate(plain(s.get("id", "")), (qm[1], qt[1]), xytext=(5, 5), textcoords="offset points",
                                fontsize=7.5, color="0.35")
            shown += used
        for rows, marker, colour, label in series.values():
            if not rows:
                continue
            a = np.array(rows, dtype=float)
            conv = a[:, 6].astype(bool)
            for sel, face, lab in ((conv, colour, label), (~conv, "white", label + " (not converged)")):
                if sel.any():
                    b = a[sel]
                    ax.errorbar(b[:, 0], b[:, 3], xerr=[b[:, 1], b[:, 2]], yerr=[b[:, 4], b[:, 5]], fmt=marker,
                                ms=5, color=colour, mfc=face, lw=1, capsize=2, label=lab)
        ax.set_xlabel(r"$M\,[M_\odot]$ (posterior median, 16–84 %)")
        ax.set_ylabel(r"timescale $[\mathrm{yr}]$")
        ax.set_title("timescales against mass")
        if not shown:
            _empty(ax, "no fitted star to show")
            return fig
        ax.set_xscale("log")
        ax.set_yscale("log")
        _readable_log_axis(ax.xaxis, 3.0)
        _readable_log_axis(ax.yaxis, 10.0)
        ax.legend(loc="best", frameon=True, framealpha=0.9)
        ax.grid(alpha=0.25, which="both", lw=0.5)
    return fig


def mass_recovery_figure(rows: list) -> Figure:
    """Recovered (posterior median, 68 % and 95 % intervals) against true mass, with the 1:1 line.

    Parameters
    ----------
    rows : list of dict
        One per star (radwalk.report.truths.mass_recovery): ``truth``, ``p16``, ``p50``, ``p84``,
        ``p2_5``, ``p97_5`` [M_sun] (the 95 % ends NaN when unknown), ``ok`` (converged), ``id``.

    Returns
    -------
    Figure
    """
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(6.5, 6), layout="constrained")
        ax = fig.add_subplot()
        ax.set_xlabel(r"true mass $M\,[M_\odot]$")
        ax.set_ylabel(r"recovered mass $M\,[M_\odot]$ (posterior median)")
        ax.set_title("recovered against true mass")
        if not rows:
            _empty(ax, "no fitted star with a true mass")
            return fig
        a = np.array([[r["truth"], r["p50"], r["p16"], r["p84"], r["p2_5"], r["p97_5"], bool(r["ok"])]
                      for r in rows], dtype=float)
        t, mid = a[:, 0], a[:, 1]
        has95 = np.isfinite(a[:, 4]) & np.isfinite(a[:, 5])
        if has95.any():
            b = a[has95]
            ax.errorbar(b[:, 0], b[:, 1], yerr=[np.maximum(b[:, 1] - b[:, 4], 0), np.maximum(b[:, 5] - b[:, 1], 0)],
                        fmt="none", ecolor=POSTERIOR, alpha=0.35, lw=1, capsize=0, zorder=2, label="95 % interval")
        conv = a[:, 6].astype(bool)
        for sel, face, label in ((conv, POSTERIOR, "median, 68 % interval"),
                                 (~conv, "white", "median, 68 % interval (not converged)")):
            if sel.any():
                b = a[sel]
                ax.errorbar(b[:, 0], b[:, 1], yerr=[np.maximum(b[:, 1] - b[:, 2], 0), np.maximum(b[:, 3] - b[:, 1], 0)],
                            fmt="o", ms=5, color=POSTERIOR, mfc=face, lw=1.6, capsize=2, zorder=3, label=label)
        ends = np.concatenate([t, mid, a[:, 2:6][np.isfinite(a[:, 2:6])]])
        lo, hi = float(np.min(ends)), float(np.max(ends))
        pad = 0.05 * (hi - lo) if hi > lo else 0.1 * max(abs(hi), 1.0)
        lo, hi = lo - pad, hi + pad
        ax.plot([lo, hi], [lo, hi], color="0.4", ls="--", lw=1, zorder=1, label="1:1 (recovered = true)")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.set_aspect("equal", adjustable="box")
        ax.legend(loc="upper left", frameon=True, framealpha=0.9)
        ax.grid(alpha=0.25, lw=0.5)
    return fig


def catalog_figures(summaries: list, recovery: list | None = None) -> dict:
    """The catalog's figures, not saved.

    Parameters
    ----------
    summaries : list of dict
        Per-star summary documents (summary.json), failed stars included.
    recovery : list of dict, optional
        Recovered against true mass (radwalk.report.truths.mass_recovery); the figure is drawn only when
        some star has a true mass.

    Returns
    -------
    dict
        {"hr_diagram": Figure, "timescales_vs_mass": Figure} and "mass_recovery" with truths.
    """
    figures = {"hr_diagram": hr_diagram_figure(summaries), "timescales_vs_mass": timescales_vs_mass_figure(summaries)}
    if recovery:
        figures["mass_recovery"] = mass_recovery_figure(recovery)
    return figures


def write_catalog_plots(summaries: list, folder, recovery: list | None = None) -> dict:
    """Writes hr_diagram.png, timescales_vs_mass.png and, with truths, mass_recovery.png into ``folder``.

    Parameters
    ----------
    summaries : list of dict
        Per-star summary documents (summary.json), failed stars included.
    folder : str or Path
        The report folder.
    recovery : list of dict, optional
        Recovered against true mass (see :func:`catalog_figures`).

    Returns
    -------
    dict
        {kind: file name relative to ``folder``}.
    """
    folder = Path(folder)
    out = {}
    for kind, fig in catalog_figures(summaries, recovery).items():
        name = f"{kind}.png"
        save_figure(fig, folder / name)
        out[kind] = name
    return out
