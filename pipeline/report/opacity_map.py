"""A map of an opacity law: log10 kappa over log10 T and log10 rho, its validity range outlined.

``radwalk check-plugin`` writes one next to its table of checks, so the
author of a law sees where it is NaN or <= 0 (blank) and where it was
claimed to hold (the red outline).
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np

from radwalk.constants import X_SUN, Z_SUN
from radwalk.errors import ConfigError, RadwalkError
from radwalk.host.contracts.inputs import checked_range
from radwalk.host.params import Param
from radwalk.results.files import atomic_path

PAD_FRACTION = 0.15  # the map reaches this fraction of each span beyond the range ...
PAD_MIN_DEX = 0.3  # ... and at least this far


def log_kappa_grid(component, X: float, Z: float, grid_points: int = 160):
    """log10 kappa on a log T x log rho grid reaching beyond the law's range.

    Warnings from evaluating outside the range are expected and not passed
    on.  A law that refuses points outside its range (a RadwalkError) is
    evaluated inside it only.

    Parameters
    ----------
    component : opacity law
    X, Z : float
        Composition.
    grid_points : int
        Points per axis.

    Returns
    -------
    log_T, log_rho : ndarray [grid_points, grid_points]
        log10 of T (K) and rho (g/cm^3), rho along the first axis.
    log_kappa : ndarray [grid_points, grid_points]
        log10 kappa (cm^2/g); NaN where kappa is not finite and positive, or not evaluated.
    """
    validity = getattr(component, "validity", None)
    (rlo, rhi), _ = checked_range(validity, "rho")
    (tlo, thi), _ = checked_range(validity, "T")
    lims = []
    for lo, hi in ((math.log10(tlo), math.log10(thi)), (math.log10(rlo), math.log10(rhi))):
        pad = max(PAD_FRACTION * (hi - lo), PAD_MIN_DEX)
        lims.append((lo - pad, hi + pad))
    LT, LR = np.meshgrid(np.linspace(*lims[0], grid_points), np.linspace(*lims[1], grid_points))
    params = {p.name: float(p.default) for p in getattr(component, "params", ()) if isinstance(p, Param)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            kappa = np.asarray(component.kappa(10.0**LR, 10.0**LT, X, Z, **params), dtype=float)
        except RadwalkError:
            inside = (LT >= math.log10(tlo)) & (LT <= math.log10(thi)) & (LR >= math.log10(rlo)) & (
                LR <= math.log10(rhi))
            kappa = np.full(LT.shape, np.nan)
            kappa[inside] = component.kappa(10.0 ** LR[inside], 10.0 ** LT[inside], X, Z, **params)
        with np.errstate(divide="ignore", invalid="ignore"):
            logk = np.where(kappa > 0, np.log10(np.where(kappa > 0, kappa, 1.0)), np.nan)
    return LT, LR, logk


def plot_log_kappa_map(entry, path, *, X: float | None = None, Z: float | None = None,
                       options: dict | None = None, grid_points: int = 160) -> Path:
    """Writes a PNG of log10 kappa over log10 T and log10 rho with the validity range outlined.

    The map reaches 15 % of each span beyond the range (at least 0.3 dex) so
    that the outline shows where the law stops being trusted (see
    :func:`log_kappa_grid`).

    Parameters
    ----------
    entry : Entry or opacity component
    path : str or Path
        PNG file to write (atomically).
    X, Z : float, optional
        Composition; by default the solar one (Asplund et al. 2009) moved
        into the stated ranges.
    options : dict, optional
        Passed to the component's ``configure`` first.
    grid_points : int
        Points per axis.

    Returns
    -------
    Path
        The file written.
    """
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    comp = getattr(entry, "component", entry)
    if getattr(entry, "stage", "opacity") != "opacity" or not callable(getattr(comp, "kappa", None)):
        name = getattr(comp, "name", comp)
        raise ConfigError(f"plot_log_kappa_map draws opacity laws; {name!r} is not one")
    if options:
        comp = comp.configure(**options)
    validity = getattr(comp, "validity", None)
    (rlo, rhi), r_stated = checked_range(validity, "rho")
    (tlo, thi), t_stated = checked_range(validity, "T")
    if X is None:
        (lo, hi), _ = checked_range(validity, "X")
        X = min(max(X_SUN, lo), hi)
    if Z is None:
        (lo, hi), _ = checked_range(validity, "Z")
        Z = min(max(Z_SUN, lo), hi)
    X, Z = float(X), float(Z)
    LT, LR, logk = log_kappa_grid(comp, X, Z, grid_points)

    # a Figure outside pyplot: no backend is chosen or switched, nothing stays open
    fig = Figure(figsize=(6.4, 4.8))
    ax = fig.subplots()
    mesh = ax.pcolormesh(LT, LR, np.ma.masked_invalid(logk), shading="auto", cmap="viridis")
    fig.colorbar(mesh, ax=ax, label=r"$\log_{10}\,\kappa$ [cm$^2$ g$^{-1}$]")
    stated = r_stated and t_stated
    # red shows on the colour map and on the blank parts a refusing law leaves outside its range
    outline = Rectangle((math.log10(tlo), math.log10(rlo)), math.log10(thi / tlo), math.log10(rhi / rlo),
                        fill=False, edgecolor="red", linewidth=1.5, linestyle="-" if stated else "--",
                        label="stated validity" if stated else "validity (default where not stated)")
    ax.add_patch(outline)
    ax.set_xlabel(r"$\log_{10}\,T$ [K]")
    ax.set_ylabel(r"$\log_{10}\,\rho$ [g cm$^{-3}$]")
    ax.set_title(f"{getattr(comp, 'name', 'opacity')}: X = {X:g}, Z = {Z:g}")
    ax.legend(loc="lower right", fontsize="small", framealpha=0.6)
    path = Path(path)
    with atomic_path(path, suffix=".png") as tmp:
        fig.savefig(tmp, format="png", dpi=100)
    return path
