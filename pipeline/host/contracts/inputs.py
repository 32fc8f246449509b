"""Where the contract checks evaluate a component: ranges, compositions, masses, parameter values.

A check spans the range a component states in its ``validity`` and falls
back on :data:`DEFAULT_RANGES` where it states none.
"""

from __future__ import annotations

import numpy as np

from radwalk.host.components import BoundOpacity
from radwalk.host.params import Param, Validity
from radwalk.host.stages import DEFAULTS

# Ranges used where a component states none (K, g/cm^3, M_sun, mass fractions): from the cool
# envelopes of late-type main-sequence stars to the centres of massive ones (common practice, no source).
DEFAULT_RANGES = {
    "T": (3e3, 1e8), "rho": (1e-10, 1e3), "mass": (0.5, 20.0), "X": (0.0, 0.8), "Z": (1e-4, 0.04),
}
UNITS = {"T": "K", "rho": "g/cm^3", "mass": "M_sun", "X": "", "Z": ""}


def fmt_point(**values) -> str:
    """``rho=1e-08 g/cm^3, T=1.12e+06 K, ...``: a point of the check grid, for a failure's detail."""
    return ", ".join(f"{key}={float(v):.6g} {UNITS.get(key, '')}".rstrip() for key, v in values.items())


def checked_range(validity, key: str) -> tuple[tuple[float, float], bool]:
    """The range the checks span on ``key``: the stated one or the default; and whether it was stated.

    Parameters
    ----------
    validity : Validity or anything else
        The component's declaration (anything that is not a Validity states nothing).
    key : str
        "T" (K), "rho" (g/cm^3), "mass" (M_sun), "X" or "Z".

    Returns
    -------
    (lo, hi) : tuple of float
        A range on a log axis ("T", "rho", "mass") starts above zero.
    stated : bool
    """
    stated = getattr(validity, key, None) if isinstance(validity, Validity) else None
    if stated is None:
        return DEFAULT_RANGES[key], False
    lo, hi = float(stated[0]), float(stated[1])
    if key in ("T", "rho", "mass") and lo <= 0:
        lo = min(DEFAULT_RANGES[key][0], hi)  # a closed range down to zero: start the log grid here
    return (lo, hi), True


def compositions(validity) -> np.ndarray:
    """Three (X, Z) pairs [3, 2] spanning the X and Z ranges: middle, X low with Z high, X high with Z low."""
    (xl, xh), _ = checked_range(validity, "X")
    (zl, zh), _ = checked_range(validity, "Z")
    pairs = [(0.5 * (xl + xh), 0.5 * (zl + zh)), (xl, zh), (xh, zl)]
    return np.array([(x, min(z, 1.0 - x)) for x, z in pairs])


def masses(validity, n: int = 3) -> np.ndarray:
    """``n`` masses [n] in M_sun, evenly spaced in log over the mass range."""
    (lo, hi), _ = checked_range(validity, "mass")
    return np.geomspace(lo, hi, n) if hi > lo else np.full(n, lo)


def default_params(component, shape) -> dict:
    """Each declared parameter at its default, as an array of ``shape``."""
    return {p.name: np.full(shape, float(p.default)) for p in getattr(component, "params", ())
            if isinstance(p, Param)}


def default_opacity(registry) -> BoundOpacity:
    """The opacity stage's default law (the first registered one if that is missing), parameters at defaults."""
    names = registry.names("opacity")
    law = registry.get("opacity", DEFAULTS["opacity"] if DEFAULTS["opacity"] in names else names[0])
    return BoundOpacity(law, {p.name: p.default for p in law.params})
