"""The catalog's comparison of opacity laws: each star's mass and photon diffusion time under every law.

A run that fits its stars under several opacity laws (``--opacity a,b``)
keeps every law's fit in each star's summary.json (its ``comparison``
section).  This module draws, from those documents, one figure for the
catalog page: for every compared law B against the run's first law A, the
posterior medians with their 16-84 % intervals of the mass and of the photon
diffusion time under B against those under A (with the 1:1 line), and the
ratios B / A against the mass under A.

The ratio's bar is the medians' ratio with the two intervals' half-widths
in ln added in quadrature, as if the two posteriors were independent.
They are not (the same star and data, the same seed): the bar is a rough
guide to the ratio's spread, not its credible interval, which would need the
paired samples of the two chain files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import matplotlib
import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from radwalk.report.figures import STYLE, plain, save_figure

LAW_FIGURE = "law_comparison.png"
KIND = "law_comparison"
QUANTITIES = (("mass", r"$M$", r"M_\odot"), ("diffusion_time", r"$t_{\rm diff}$", r"\mathrm{yr}"))
MARKERS = ("o", "s", "D", "^", "v", "P", "X")
COLOURS = ("#1f4e79", "#d07000", "#2c7f2c", "#7a3b8f", "#8c564b", "#c2185b", "#4d4d4d")
FEW = 8  # with at most this many stars each point is labelled with its star id


@dataclass
class LawPairs:
    """One compared law B against the reference law A: every star that both laws fitted.

    ``a[q]`` and ``b[q]`` are arrays [n, 3] of (p16, p50, p84) of quantity
    ``q`` (mass in M_sun, diffusion time in yr) under A and B; ``ids`` [n] the
    stars; ``left_out`` the stars of the run that are not drawn, with why.
    """

    reference: str
    law: str
    ids: list = field(default_factory=list)
    a: dict = field(default_factory=dict)
    b: dict = field(default_factory=dict)
    left_out: list = field(default_factory=list)


def _triple(entry: dict, key: str) -> tuple:
    """(p16, p50, p84) of ``key`` in a law's fit (a parameter or a derived quantity); NaN when missing.

    A time is converted to yr (the unit the figure's axes use), a mass must be in M_sun.
    """
    for where in ("parameters", "derived"):
        d = (entry.get(where) or {}).get(key)
        if isinstance(d, dict):
            try:
                q = tuple(float(d.get(p)) for p in ("p16", "p50", "p84"))
            except (TypeError, ValueError):
                return (math.nan,) * 3
            unit = str(d.get("unit") or "")
            factor = 1.0
            if key == "diffusion_time" and unit and unit != "yr":
                import astropy.units as u

                try:
                    factor = float(u.Unit(unit).to(u.yr))
                except (ValueError, u.UnitsError):
                    return (math.nan,) * 3
            return tuple(v * factor for v in q)
    return (math.nan,) * 3


def law_pairs(summaries: list) -> list[LawPairs]:
    """Every compared law against the run's first law, over the stars of a run.

    Parameters
    ----------
    summaries : list of dict
        The stars' summary documents (summary.json), failed stars included.

    Returns
    -------
    list of LawPairs
        One per compared law, in the run's order; empty when no star was fitted under more than one law.
    """
    laws: list[str] = []
    for s in summaries:
        for op in (s.get("comparison") or {}):
            if op not in laws:
                laws.append(op)
    if len(laws) < 2:
        return []
    reference = laws[0]
    out = []
    for law in laws[1:]:
        pair = LawPairs(reference, law)
        rows_a, rows_b = {q: [] for q, *_ in QUANTITIES}, {q: [] for q, *_ in QUANTITIES}
        for s in summaries:
            comp = s.get("comparison") or {}
            sid = str(s.get("id", ""))
            fitted = [op for op in (reference, law) if (comp.get(op) or {}).get("status", "ok") != "failed"
                      and op in comp]
            if len(fitted) < 2:
                why = "not fitted" if not comp else \
                    ", ".join(f"{op} failed" for op in (reference, law) if op not in fitted)
                pair.left_out.append((sid, why))
                continue
            qa = {q: _triple(comp[reference], q) for q, *_ in QUANTITIES}
            qb = {q: _triple(comp[law], q) for q, *_ in QUANTITIES}
            if not all(np.isfinite(qa[q][1]) and np.isfinite(qb[q][1]) for q, *_ in QUANTITIES):
                pair.left_out.append((sid, "no mass or diffusion time"))
                continue
            pair.ids.append(sid)
            for q, *_ in QUANTITIES:
                rows_a[q].append(qa[q])
                rows_b[q].append(qb[q])
        pair.a = {q: np.array(v, dtype=float).reshape(-1, 3) for q, v in rows_a.items()}
        pair.b = {q: np.array(v, dtype=float).reshape(-1, 3) for q, v in rows_b.items()}
        out.append(pair)
    return out


def _bars(q: np.ndarray) -> np.ndarray:
    """[2, n] lower and upper error lengths of (p16, p50, p84) rows [n, 3]."""
    return np.vstack([np.maximum(q[:, 1] - q[:, 0], 0.0), np.maximum(q[:, 2] - q[:, 1], 0.0)])


def ratio_with_bars(qa: np.ndarray, qb: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ratio of the medians B / A [n] and its [2, n] error lengths.

    The bar's half-widths in ln are those of A and B added in quadrature (as
    if the posteriors were independent: see the module docstring); in ln, so
    that a bar of a positive quantity never reaches zero or below.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = qb[:, 1] / qa[:, 1]
        down = np.hypot(np.log(qa[:, 2] / qa[:, 1]), np.log(qb[:, 1] / qb[:, 0]))
        up = np.hypot(np.log(qa[:, 1] / qa[:, 0]), np.log(qb[:, 2] / qb[:, 1]))
    down, up = np.nan_to_num(down, nan=0.0, posinf=0.0), np.nan_to_num(up, nan=0.0, posinf=0.0)
    return ratio, np.vstack([ratio * (1.0 - np.exp(-down)), ratio * np.expm1(up)])


def _log_ticks(axis):
    """Ticks at 1, 2 and 5 times each power of ten, in plain numbers: a comparison spans a decade or two,
    where matplotlib's default labels only the powers (or, labelling minor ticks, overlaps them)."""
    axis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:.3g}"))
    axis.set_minor_formatter(NullFormatter())


def law_comparison_figure(summaries: list) -> Figure | None:
    """Mass and photon diffusion time of each star under every compared law against the first law.

    Parameters
    ----------
    summaries : list of dict
        The stars' summary documents (summary.json), failed stars included.

    Returns
    -------
    matplotlib.figure.Figure or None
        Four panels (the two quantities, B against A with the 1:1 line, and their ratios B / A against
        the mass under A); None when no star was fitted under more than one law.
    """
    pairs = law_pairs(summaries)
    if not pairs:
        return None
    with matplotlib.rc_context(STYLE):
        fig = Figure(figsize=(9.0, 8.0), layout="constrained")
        axes = fig.subplots(2, 2)
        reference = pairs[0].reference
        shown = 0
        for j, pair in enumerate(pairs):
            if not pair.ids:
                continue
            shown += len(pair.ids)
            style = {"fmt": MARKERS[j % len(MARKERS)], "color": COLOURS[j % len(COLOURS)], "ms": 5, "lw": 1,
                     "capsize": 2, "label": plain(pair.law)}
            mass_a = pair.a["mass"]
            for col, (q, _sym, _unit) in enumerate(QUANTITIES):
                qa, qb = pair.a[q], pair.b[q]
                ax = axes[0, col]
                ax.errorbar(qa[:, 1], qb[:, 1], xerr=_bars(qa), yerr=_bars(qb), **style)
                if len(pair.ids) <= FEW:
                    for sid, x, y in zip(pair.ids, qa[:, 1], qb[:, 1]):
                        ax.annotate(plain(sid), (x, y), xytext=(4, 4), textcoords="offset points", fontsize=7.5,
                                    color="0.35")
                ratio, bars = ratio_with_bars(qa, qb)
                axes[1, col].errorbar(mass_a[:, 1], ratio, xerr=_bars(mass_a), yerr=bars, **style)
        for col, (q, sym, unit) in enumerate(QUANTITIES):
            ax = axes[0, col]
            if q == "diffusion_time":
                ax.set_xscale("log")
                ax.set_yscale("log")
                for axis in (ax.xaxis, ax.yaxis):
                    _log_ticks(axis)
            if shown:
                lo = min(ax.get_xlim()[0], ax.get_ylim()[0])
                hi = max(ax.get_xlim()[1], ax.get_ylim()[1])
                if q == "diffusion_time":
                    lo = max(lo, 1e-300)
                ax.plot([lo, hi], [lo, hi], color="0.5", lw=1, ls="--", label="1:1", zorder=0)
                ax.set_xlim(lo, hi)
                ax.set_ylim(lo, hi)
            ax.set_xlabel(f"{sym}$\\,[{unit}]$ under {plain(reference)}")
            ax.set_ylabel(f"{sym}$\\,[{unit}]$ under the compared law")
            ax.set_title(f"{'mass' if q == 'mass' else 'photon diffusion time'}: law against law")
            rax = axes[1, col]
            rax.axhline(1.0, color="0.5", lw=1, ls="--", zorder=0)
            if q == "diffusion_time":
                rax.set_yscale("log")
                _log_ticks(rax.yaxis)
            rax.set_xlabel(f"$M\\,[M_\\odot]$ under {plain(reference)}")
            rax.set_ylabel(f"{sym} (compared law) / {sym} ({plain(reference)})")
            rax.set_title(f"ratio of the {'masses' if q == 'mass' else 'diffusion times'} against mass")
            for a in (ax, rax):
                a.grid(alpha=0.25, which="both", lw=0.5)
        if shown:
            axes[0, 0].legend(loc="best", frameon=True, framealpha=0.9)
        else:
            for ax in axes.flat:
                ax.text(0.5, 0.5, "no star fitted under two laws", transform=ax.transAxes, ha="center",
                        va="center", fontsize=11, color="0.3")
        fig.suptitle(f"opacity laws against {plain(reference)} (posterior medians, 16-84 %)", fontsize=12)
    return fig


def write_law_figures(summaries: list, folder) -> dict:
    """Writes law_comparison.png into ``folder`` when the run compared opacity laws.

    Parameters
    ----------
    summaries : list of dict
        The stars' summary documents (summary.json), failed stars included.
    folder : str or Path
        The report folder.

    Returns
    -------
    dict
        ``{"law_comparison": "law_comparison.png"}``, or empty when no star was fitted under more than one law.
    """
    from pathlib import Path

    fig = law_comparison_figure(summaries)
    if fig is None:
        return {}
    save_figure(fig, Path(folder) / LAW_FIGURE)
    return {KIND: LAW_FIGURE}
