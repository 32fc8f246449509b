"""Component protocols for the four stages and the arrays they exchange.

The stages themselves (names, hooks, which protocol each uses) are listed in
:mod:`radwalk.host.stages`.

Arrays are plain numpy floats in cgs units with a leading sample (walker) axis
of length ``n``.  Per-sample inputs (X, Z, component parameters) arrive with
shape ``[n]`` or already shaped to broadcast against the field arrays; use
:func:`per_sample` to lift a ``[n]`` array against a ``[n, ngrid]`` field.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Protocol, runtime_checkable

import numpy as np

from radwalk.host.params import Param, Validity

# Observables a likelihood compares, in cgs: radius (cm), luminosity (erg/s), teff (K).
OBSERVABLES = ("radius", "luminosity", "teff")


def read_only(a):
    """A read-only view of an array (anything else as it is); a dict's arrays likewise, in a new dict.

    Components receive their inputs so: the host's profile fields, predictions and
    per-sample values are shared with later steps, and a component that wrote into
    them would corrupt those silently (a density scaled in place changes the
    central density reported afterwards).
    """
    if isinstance(a, np.ndarray):
        if not a.flags.writeable:
            return a
        v = a.view()
        v.flags.writeable = False
        return v
    if isinstance(a, dict):
        return {key: read_only(v) for key, v in a.items()}
    return a


def call_component(what: str, method, *args, **kwargs):
    """``method(*args, **kwargs)`` with every array read-only (:func:`read_only`).

    Raises
    ------
    PluginError
        Naming ``what`` (e.g. ``opacity 'my-law'``) when the component writes into an input.
    """
    try:
        return method(*(read_only(a) for a in args), **{key: read_only(v) for key, v in kwargs.items()})
    except ValueError as exc:
        if "read-only" not in str(exc):
            raise
        from radwalk.errors import PluginError

        raise PluginError(f"{what} writes into its input arrays ({exc}); they are shared and read-only: copy an "
                          "array before changing it (`radwalk check-plugin` names the input)", plugin=what) from None


def per_sample(a, like):
    """Reshapes a per-sample array ``[n]`` (or scalar) to broadcast against ``like``."""
    a = np.asarray(a, dtype=float)
    like = np.asarray(like)
    if a.ndim == 0 or like.ndim <= 1:
        return a
    if a.ndim == 1:
        return a.reshape(a.shape + (1,) * (like.ndim - 1))
    return a


@dataclass
class Profile:
    """A radial structure for ``n`` stars on a common relative grid.

    All 2-D arrays have shape ``[n, ngrid]`` and run from the centre
    (index 0, r = 0) to the surface (index -1, r = R).

    Attributes
    ----------
    r : ndarray, cm
    m : ndarray, g
        Mass inside r.
    rho : ndarray, g/cm^3
    P : ndarray, dyn/cm^2
        Total pressure (gas + radiation).
    T : ndarray, K
    beta : ndarray
        Gas pressure over total pressure.
    M, R : ndarray [n], g and cm
    X, Z : ndarray [n]
        Hydrogen and metal mass fractions.
    L : ndarray [n, ngrid], erg/s, optional
        Luminosity through the sphere of radius r.  Models that solve the
        energy equation give it; when it is None the transport stage spreads
        the star's luminosity over the profile by pp + CNO energy generation.
    nabla : ndarray [n, ngrid], optional
        Actual temperature gradient dlnT/dlnP.
    convective : ndarray [n, ngrid] of bool, optional
        Convective layers as the model found them (Schwarzschild criterion);
        None lets the transport stage apply the criterion itself.
    v_conv : ndarray [n, ngrid], cm/s, optional
        Convective velocity (mixing-length theory), 0 in radiative layers.
    u : ndarray [n, ngrid], erg/g, optional
        Specific internal energy from the model's equation of state; None
        means an ideal monatomic gas plus radiation.
    X_profile : ndarray [n, ngrid], optional
        Hydrogen mass fraction through the star when it is not uniform (an
        evolved star burns its core); None means X throughout.
    scalars : dict, optional
        Model-specific per-sample quantities, name -> [n] (e.g. convective
        turnover times); names and units are listed in the quantity catalogue.
    """

    r: np.ndarray
    m: np.ndarray
    rho: np.ndarray
    P: np.ndarray
    T: np.ndarray
    beta: np.ndarray
    M: np.ndarray
    R: np.ndarray
    X: np.ndarray
    Z: np.ndarray
    L: np.ndarray | None = None
    nabla: np.ndarray | None = None
    convective: np.ndarray | None = None
    v_conv: np.ndarray | None = None
    u: np.ndarray | None = None
    X_profile: np.ndarray | None = None
    scalars: dict = field(default_factory=dict)

    @property
    def n(self) -> int:
        return self.r.shape[0]


@runtime_checkable
class Component(Protocol):
    """What every component declares.

    Optional, for any stage
    -----------------------
    ``support(M, X, Z, **params) -> ndarray of bool [n]``
        The joint support of the component: where its model exists and its
        prior is non-zero, for M [n] in g, X, Z [n] and its own parameters
        by name ([n] or scalars), with ``opacity=`` the bound opacity stage
        when the method takes that keyword.  Use it for a limit that ties
        several values together, which a one-parameter Prior cannot express
        (an age no greater than the main-sequence lifetime of the mass).
        The posterior is -inf where it is False and prior draws are redrawn
        there (:meth:`radwalk.forward.stages.StageSet.support`); it must hold
        at the parameters' defaults (contract check ``support``).
    ``support_note(M, X, Z, **params) -> str``
        Why the first sample lies outside the support, in words (for
        ``radwalk model``'s refusal); a generic message otherwise.
    ``log_prior_density(M, X, Z, **params) -> ndarray [n]``
        A joint log prior term of its parameters given the star's, added to
        the declared priors inside the support.  An age uniform up to a
        mass-dependent lifetime is a uniform Prior, the support, and the
        term -log(lifetime) (declare it in one stage only: terms add up).
    ``hydrogen_fraction(Z, **params) -> ndarray [n]``
        X as a function of Z, for a model whose stars follow one composition
        rule (a grid of tracks); a fit then computes X instead of sampling it
        (:meth:`radwalk.forward.stages.StageSet.hydrogen_fraction`).

    Optional, for profiles
    ----------------------
    ``quantities(M, X, Z, **params) -> dict`` and ``band_samples: int``
        Scalars of the quantity catalogue in their computed units, [n], for
        every sample at little cost (read off a grid); a fit then solves the
        radial structure for ``band_samples`` evenly spaced samples only, for
        the profile bands (:func:`radwalk.inference.derived.derive`).

    Optional, for relations
    -----------------------
    ``unreachable_note(observed, opacity=..., Z=(lo, hi)) -> str | None``
        Why no star of the relation matches the observations (beyond the end
        of the main sequence, say), added to a fit's refusal.
    """

    name: str
    description: str
    params: tuple[Param, ...]
    validity: Validity


@runtime_checkable
class ProfileModel(Component, Protocol):
    def profile(self, M, R, X, Z, **params) -> Profile:
        """Structure of stars of mass M (g), radius R (cm), composition X, Z."""


@runtime_checkable
class OpacityLaw(Component, Protocol):
    def kappa(self, rho, T, X, Z, **params) -> np.ndarray:
        """Rosseland-mean opacity, cm^2/g, broadcasting over all inputs."""


@runtime_checkable
class Relation(Component, Protocol):
    def predict(self, M, X, Z, opacity, **params) -> tuple[np.ndarray, np.ndarray]:
        """Radius (cm) and luminosity (erg/s) for mass M (g) and composition.

        ``opacity`` is a callable ``kappa(rho, T, X, Z)`` with the opacity
        law's own parameters already bound (see :class:`BoundOpacity`).
        """


@runtime_checkable
class Likelihood(Component, Protocol):
    def loglike(self, predicted: dict, observed: Observations, **params) -> np.ndarray:
        """Log-likelihood ``[n]`` of predicted observables given the observed ones."""


@dataclass(frozen=True)
class Observations:
    """Measured observables of one star in cgs; NaN value means not measured.

    ``values`` and ``errors`` map observable names (see OBSERVABLES) to floats.
    """

    values: dict
    errors: dict

    def present(self):
        """Names of the observables that were measured."""
        return [k for k in OBSERVABLES if np.isfinite(self.values.get(k, np.nan))]


class BoundOpacity:
    """An opacity law with its parameters bound, callable as ``kappa(rho, T, X, Z)``.

    Per-sample parameter arrays ``[n]`` are lifted to broadcast against the
    field they are evaluated on, so relations and transport need not know the
    law's parameters.
    """

    def __init__(self, law: OpacityLaw, params: dict | None = None):
        self.law = law
        self.params = dict(params or {})

    def __call__(self, rho, T, X, Z):
        like = np.broadcast(np.asarray(rho), np.asarray(T))
        ref = np.empty(like.shape) if like.ndim > 1 else np.asarray(rho)
        kw = {k: per_sample(v, ref) for k, v in self.params.items()}
        return call_component(f"opacity {self.law.name!r}", self.law.kappa, rho, T, per_sample(X, ref),
                              per_sample(Z, ref), **kw)
