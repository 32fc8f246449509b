"""The opacity check over real stars: the law at every layer of stars of the default model, centre to photosphere.

A fit evaluates the opacity law in every layer of every star it models,
whatever range the law states: the default track grid solves its tracks with
the law, and the profile bands solve stars with it.  A law finite and
positive inside its stated range but NaN or negative in a cool outer
envelope passes the grid checks of :mod:`.opacity` and breaks the fit later,
so this check evaluates it at the (rho, T) of solved zero-age stars of the
default model (the default profile stage with the default opacity law, at
the profile's default parameters), and names a bad point by rho, T and r/R.
"""

from __future__ import annotations

import numpy as np

from radwalk import constants as k
from radwalk.host.contracts.inputs import checked_range, default_opacity, default_params, masses
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Subject, record
from radwalk.host.params import Validity
from radwalk.host.stages import DEFAULTS

STAR_COUNT = 4  # stars spread in log mass over the default profile's mass range
_STARS: dict = {}  # (profile source, profile name, opacity name) -> StarLayers or the reason there are none


class StarLayers:
    """The layers of a few solved stars: rho, T, r/R [n, g], X, Z [n, 1], and how to name them."""

    def __init__(self, profile_name: str, opacity_name: str, M, prof):
        self.profile_name, self.opacity_name = profile_name, opacity_name
        self.M = np.asarray(M, dtype=float)
        self.rho = np.asarray(prof.rho, dtype=float)
        self.T = np.asarray(prof.T, dtype=float)
        R = np.asarray(prof.R, dtype=float).reshape(-1, 1)
        self.r_rel = np.asarray(prof.r, dtype=float) / R
        self.X = np.asarray(prof.X, dtype=float).reshape(-1, 1)
        self.Z = np.asarray(prof.Z, dtype=float).reshape(-1, 1)

    def describe(self) -> str:
        ms = ", ".join(f"{m / k.M_SUN:.3g}" for m in self.M)
        return (f"zero-age stars of {ms} M_sun, Z={float(self.Z[0, 0]):.4g} ({self.profile_name!r} profile, "
                f"{self.opacity_name!r} opacity)")

    def point(self, i: int, j: int) -> str:
        return (f"rho={self.rho[i, j]:.4g} g/cm^3, T={self.T[i, j]:.4g} K, r/R={self.r_rel[i, j]:.6g} in the "
                f"{self.M[i] / k.M_SUN:.3g} M_sun star")


def star_layers(registry) -> StarLayers | str:
    """The layers of zero-age stars of the default model (kept per process), or why there are none."""
    names = registry.names("profile")
    if DEFAULTS["profile"] not in names:
        return f"no {DEFAULTS['profile']!r} profile registered"
    entry = registry.entries["profile"][DEFAULTS["profile"]]
    opacity = default_opacity(registry)
    key = (entry.source, entry.name, opacity.law.name)
    if key not in _STARS:
        prof = entry.component
        M = masses(prof.validity, STAR_COUNT) * k.M_SUN
        (zlo, zhi), _ = checked_range(prof.validity, "Z")
        n = M.size
        X, Z = np.full(n, k.X_SUN), np.full(n, min(max(k.Z_SUN, zlo), zhi))
        kwargs = {name: v.reshape(n) for name, v in default_params(prof, (n,)).items()}
        ok, res = record([], prof.profile, M, np.full(n, k.R_SUN), X, Z, opacity=opacity, **kwargs)
        _STARS[key] = StarLayers(entry.name, opacity.law.name, M, res) if ok else \
            f"the {entry.name!r} profile could not solve its stars: {res}"
    return _STARS[key]


def _inside(validity, rho, T):
    """Whether (rho, T) lies in the law's stated ranges (an unstated range holds everywhere)."""
    inside = True
    if isinstance(validity, Validity):
        for key, v in (("rho", rho), ("T", T)):
            stated = getattr(validity, key)
            if stated is not None:
                inside = inside and float(stated[0]) <= v <= float(stated[1])
    return inside


def star_row(s: Subject) -> CheckRow:
    """The ``star`` row of an opacity law (:func:`radwalk.host.contracts.check_opacity_star`)."""
    stars = star_layers(s.registry)
    if isinstance(stars, str):
        return CheckRow("star", True, f"not checked: {stars}")
    n = stars.rho.shape[0]
    params = default_params(s.component, (n, 1))
    # warnings outside the law's own range are expected here, and not the warnings check's business
    ok, out = record([], s.component.kappa, stars.rho.copy(), stars.T.copy(), stars.X.copy(), stars.Z.copy(),
                     **params)
    where = stars.describe()
    if not ok:
        return CheckRow("star", False, f"kappa raised {out} on the layers of {where}; a fit evaluates the law in "
                                       "every layer of its stars")
    try:
        out = np.asarray(out, dtype=float)
    except (TypeError, ValueError):
        return CheckRow("star", False, f"kappa returned {np.asarray(out).dtype} values on the layers of {where}")
    if out.shape != stars.rho.shape:
        return CheckRow("star", False, f"kappa returned shape {list(out.shape)} for the layers of {where}, "
                                       f"expected {list(stars.rho.shape)}")
    bad = ~np.isfinite(out) | ~(out > 0)
    if not bad.any():
        return CheckRow("star", True, f"finite and > 0 at all {out.size} layers of {where}, centre to photosphere")
    i, j = (int(v) for v in np.argwhere(bad)[0])
    value = "NaN" if np.isnan(out[i, j]) else f"{out[i, j]:.4g} cm^2/g"
    inside = _inside(getattr(s.component, "validity", None), stars.rho[i, j], stars.T[i, j])
    range_note = ("inside the law's stated range" if inside else
                  f"outside the law's stated range ({s.component.validity.describe()}), but a fit evaluates the "
                  "law in every layer of its stars; make it finite and positive there too (e.g. hold it at its "
                  "value at the edge of the range)")
    return CheckRow("star", False, f"kappa={value} at {stars.point(i, j)}: {range_note}; {int(bad.sum())} of "
                                   f"{out.size} layers of {where} give a kappa that is not finite and > 0")
