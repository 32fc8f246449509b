"""Checks whether a law is used inside the range it states it is valid for.

A component's :class:`radwalk.host.params.Validity` gives closed intervals in
temperature (K), density (g/cm^3), mass (M_sun) and the mass fractions X, Z.
The helpers here measure what fraction of the points (or, with weights, of the
mass or any other weight) falls outside, and say so in one line that can go
to a warning, the summary table and the report.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from radwalk.errors import ModelError, ValidityWarning
from radwalk.host.params import Validity

_AXES = (("T", "K"), ("rho", "g/cm^3"), ("X", ""), ("Z", ""), ("mass", "M_sun"))


@dataclass(frozen=True)
class Excursion:
    """How much of an input lies outside one axis' range (fractions in [0, 1])."""

    axis: str
    below: float
    above: float
    invalid: float  # NaN or otherwise not comparable

    @property
    def outside(self) -> float:
        return self.below + self.above + self.invalid


def _unpack(law) -> tuple[Validity, str | None]:
    if isinstance(law, Validity):
        return law, None
    validity = getattr(law, "validity", None)
    if not isinstance(validity, Validity):
        raise ModelError(f"{law!r} is neither a Validity nor a component with a .validity")
    return validity, getattr(law, "name", None)


def fraction_outside(
    law, rho=None, T=None, X=None, Z=None, weights=None, *, mass=None
) -> tuple[float, list[Excursion]]:
    """Fraction of points (or of the weight) outside a law's validity ranges.

    Parameters
    ----------
    law : Validity or component
        The ranges, or any object carrying them as ``.validity``.
    rho : array_like, g/cm^3, optional
    T : array_like, K, optional
    X, Z : array_like, dimensionless, optional
    weights : array_like, optional
        Non-negative weights (for example the mass of each shell, g),
        broadcast against the other inputs; equal weights if omitted.
    mass : array_like, M_sun, optional
        Stellar mass, for relations that state a mass range.

    Returns
    -------
    fraction : float
        Weighted fraction of points outside at least one range; NaN inputs
        count as outside.  Axes that are not given, or that the law does not
        limit, are not checked.
    excursions : list of Excursion
        One entry per checked axis with some part outside.
    """
    validity, _ = _unpack(law)
    given = {"T": T, "rho": rho, "X": X, "Z": Z, "mass": mass}
    checked = {k: np.asarray(v, dtype=float) for k, v in given.items()
               if v is not None and getattr(validity, k) is not None}
    if not checked:
        return 0.0, []
    shapes = [a.shape for a in checked.values()]
    if weights is not None:
        weights = np.asarray(weights, dtype=float)
        shapes.append(weights.shape)
    shape = np.broadcast_shapes(*shapes)
    if weights is None:
        w = np.ones(shape)
    else:
        w = np.broadcast_to(weights, shape)
        if not np.all(np.isfinite(w)) or np.any(w < 0):
            raise ModelError("validity weights must be finite and non-negative")
    total = float(w.sum())
    if not total > 0:
        raise ModelError("validity weights sum to zero: nothing to check")
    any_out = np.zeros(shape, dtype=bool)
    excursions = []
    for key, a in checked.items():
        lo, hi = getattr(validity, key)
        a = np.broadcast_to(a, shape)
        below = a < lo
        above = a > hi
        invalid = np.isnan(a)
        any_out |= below | above | invalid
        fractions = [float(w[m].sum()) / total for m in (below, above, invalid)]
        if sum(fractions) > 0:
            excursions.append(Excursion(key, *fractions))
    return float(w[any_out].sum()) / total, excursions


def _percent(f: float) -> str:
    return f"{100.0 * f:.3g}%"


def _describe(excursion: Excursion, validity: Validity) -> str:
    unit = dict(_AXES)[excursion.axis]
    lo, hi = getattr(validity, excursion.axis)
    parts = []
    if excursion.below:
        parts.append(f"{_percent(excursion.below)} below {lo:g} {unit}".rstrip())
    if excursion.above:
        parts.append(f"{_percent(excursion.above)} above {hi:g} {unit}".rstrip())
    if excursion.invalid:
        parts.append(f"{_percent(excursion.invalid)} not a number")
    return f"{excursion.axis}: " + ", ".join(parts)


def outside_validity(
    law, rho=None, T=None, X=None, Z=None, weights=None, *, mass=None,
    name: str | None = None, weight_name: str = "mass",
) -> str | None:
    """One line saying how much of the input lies outside a law's validity.

    Parameters
    ----------
    law : Validity or component
        The ranges, or a component carrying ``.validity`` (its ``.name`` names
        the law in the message).
    rho, T, X, Z, weights, mass
        As in :func:`fraction_outside`.
    name : str, optional
        Name of the law in the message (default: the component's name, else
        "law").
    weight_name : str
        What the weights measure, for the message ("mass" by default).

    Returns
    -------
    str or None
        For example ``"kramers used outside its validity range: 25% of points
        (T: 25% below 10000 K)"``; None when everything is inside.
    """
    validity, own_name = _unpack(law)
    fraction, excursions = fraction_outside(validity, rho, T, X, Z, weights, mass=mass)
    if fraction <= 0:
        return None
    return _message(validity, name or own_name or "law", fraction, excursions,
                    weights is not None, weight_name)


def _message(validity, label, fraction, excursions, weighted, weight_name) -> str:
    of_what = f"of the {weight_name}" if weighted else "of points"
    details = "; ".join(_describe(e, validity) for e in excursions)
    return f"{label} used outside its validity range: {_percent(fraction)} {of_what} ({details})"


def warn_outside(
    component, rho=None, T=None, X=None, Z=None, weights=None, threshold: float = 0.0,
    *, mass=None, name: str | None = None, weight_name: str = "mass",
) -> str | None:
    """Emits a ValidityWarning when more than ``threshold`` lies outside.

    Parameters
    ----------
    component : component or Validity
        The law being used.
    rho, T, X, Z, weights, mass
        As in :func:`fraction_outside`.
    threshold : float, dimensionless
        Largest fraction (of points, or of the weight) that may lie outside
        without a warning; 0 warns on any point outside.
    name, weight_name : str
        As in :func:`outside_validity`.

    Returns
    -------
    str or None
        The message that was warned, so callers can pass it on to the summary
        table and the report; None when nothing was warned.
    """
    validity, own_name = _unpack(component)
    fraction, excursions = fraction_outside(validity, rho, T, X, Z, weights, mass=mass)
    if fraction <= threshold or fraction <= 0:
        return None
    message = _message(validity, name or own_name or "law", fraction, excursions,
                       weights is not None, weight_name)
    warnings.warn(ValidityWarning(message), stacklevel=2)
    return message
