"""Solved stars for many samples: reuse of solved models, neighbour starts, one call per batch.

The solver (:func:`radwalk.physics.structure.solver.solve_star`) handles one
star.  Components that answer for ``n`` samples at once (a profile model, a
mass-radius-luminosity relation) go through :func:`solved_stars`, which

* keeps the most recent solved models in memory, so a profile and a relation
  asked about the same star in one evaluation solve it once;
* solves the samples in order of mass and starts each from the nearest model
  already solved (homology scaling, DESIGN 5a), which is 3-5 times cheaper
  than a polytrope start, falling back to the polytrope start when that fails;
* when a polytrope start fails, reaches the star by continuation in mass from
  a solar-mass star (:func:`_by_mass_continuation`) and, for an unusual opacity
  law, by continuation from the built-in law (:func:`_by_opacity_continuation`).

A star with an age is evolved along its main-sequence track from the zero-age
model (:mod:`radwalk.physics.structure.evolution`, one track each, 2-6 s of
CPU); an age past central hydrogen exhaustion is refused with a clear error
rather than answered with an extrapolated star.
"""

from __future__ import annotations

from collections import OrderedDict

import numpy as np

from radwalk import constants as k
from radwalk.errors import ConfigError, ModelError
from radwalk.physics.opacity import default_kappa
from radwalk.physics.structure.solver import StarStructure, solve_masses, solve_star

__all__ = ["solved_stars", "opacity_key", "clear_memory"]

_MEMORY: OrderedDict = OrderedDict()
_MEMORY_SIZE = 256  # solved models kept (~100 kB each)
_NEIGHBOUR_DEX = 0.15  # a solved model this close in log M (same X, Z, alpha, opacity) is a good start
_SMALLEST_OPACITY_STEP = 1.0 / 64  # continuation in the opacity gives up below this step
_REFERENCE_MASS = k.M_SUN  # the start of a continuation in mass, solved reliably from a polytrope


def clear_memory():
    """Forgets every kept model (tests use it to time cold solves)."""
    _MEMORY.clear()


def opacity_key(opacity) -> tuple:
    """A hashable identity of a bound opacity law: its name and parameter values.

    Parameters
    ----------
    opacity : callable
        ``kappa(rho, T, X, Z)``; a :class:`radwalk.host.components.BoundOpacity`
        is identified by its law's name and parameters, anything else by ``id``.
    """
    law = getattr(opacity, "law", None)
    params = getattr(opacity, "params", None)
    if law is None or params is None:
        return ("callable", id(opacity))
    frozen = []
    for name, value in sorted(params.items()):
        v = np.asarray(value, dtype=float)
        if v.size > 1 and np.ptp(v) > 0:
            return ("callable", id(opacity))  # per-sample values: no shared identity
        frozen.append((name, float(v.ravel()[0])))
    options = getattr(law, "options_key", None)
    return (law.name, tuple(frozen), options if options is not None else id(law))


def _sample_opacity(opacity, i: int):
    """The opacity of sample i as a plain ``kappa(rho, T, X, Z)`` on mesh arrays.

    A bound opacity lifts per-sample inputs against a leading sample axis; on
    one star's mesh X is a per-point array, so the law is called directly with
    sample i's parameter values instead.
    """
    law = getattr(opacity, "law", None)
    params = getattr(opacity, "params", None)
    if law is None or params is None:
        return opacity
    own = {}
    for name, value in params.items():
        v = np.asarray(value, dtype=float).reshape(-1)
        own[name] = float(v[i] if v.size > 1 else v[0])

    def kappa(rho, T, X, Z):
        return law.kappa(rho, T, X, Z, **own)

    return kappa


def _key(M, X, Z, alpha, okey):
    return (round(float(M) / 1e27, 9), round(float(X), 9), round(float(Z), 12), round(float(alpha), 9), okey)


def _neighbour(key):
    """The kept model nearest in mass with the same composition, alpha and opacity, or None."""
    best, best_d = None, _NEIGHBOUR_DEX
    for other, star in _MEMORY.items():
        if other[1:] != key[1:]:
            continue
        d = abs(np.log10(other[0] / key[0]))
        if d < best_d:
            best, best_d = star, d
    return best


def _solve_one(M, X, Z, kappa, alpha, key) -> StarStructure:
    if key in _MEMORY:
        return _recalled(key)
    start = _neighbour(key)
    star = None
    if start is not None:
        try:
            star = solve_star(M, X, Z, kappa, alpha_mlt=alpha, guess=start)
        except ModelError:
            star = None  # a poor neighbour: the polytrope start below is slower but sturdier
    if star is None:
        try:
            star = solve_star(M, X, Z, kappa, alpha_mlt=alpha)
        except ModelError as exc:
            star = _by_mass_continuation(M, X, Z, kappa, alpha) or _by_opacity_continuation(M, X, Z, kappa, alpha, exc)
    return _remember(key, star)


def _recalled(key) -> StarStructure:
    """A kept star, marked as the most recently used."""
    _MEMORY.move_to_end(key)
    return _MEMORY[key]


def _remember(key, star: StarStructure) -> StarStructure:
    """Keeps a solved star (the oldest one goes when the memory is full) and returns it."""
    _MEMORY[key] = star
    while len(_MEMORY) > _MEMORY_SIZE:
        _MEMORY.popitem(last=False)
    return star


def _by_mass_continuation(M, X, Z, kappa, alpha) -> StarStructure | None:
    """The star reached from a solved star of the reference mass by steps in mass, or None.

    Near the ends of the mass range a polytrope start can fail where a neighbour start does not
    (DESIGN 5a: low masses at some compositions); the steps are geometric and halved on failure.
    """
    try:
        start = solve_star(_REFERENCE_MASS, X, Z, kappa, alpha_mlt=alpha)
        return solve_masses([M], X, Z, kappa, start=start, alpha_mlt=alpha)[0]
    except ModelError:
        return None


def _by_opacity_continuation(M, X, Z, kappa, alpha, first_error) -> StarStructure:
    """The star under ``kappa`` reached from the built-in law by continuation in the opacity.

    A law far from real opacities somewhere in the star (a plugin's power law in the cool atmosphere, say)
    can stop Newton's method from a polytrope start even where a solution exists.  The star is then
    solved with the built-in law and followed along kappa_s = kappa_ref^(1 - s) kappa^s from s = 0 to 1,
    halving a step that fails (the continuation method of numerical analysis; Kippenhahn, Weigert & Weiss
    2012, ch. 12, use the same idea along a sequence of models).

    Raises
    ------
    ModelError
        The first error, with a note that the continuation did not get through either.
    """

    def mixed(s):
        def kappa_s(rho, T, X_, Z_):
            return np.exp((1.0 - s) * np.log(default_kappa(rho, T, X_, Z_)) + s * np.log(kappa(rho, T, X_, Z_)))
        return kappa_s

    try:
        star = solve_star(M, X, Z, default_kappa, alpha_mlt=alpha)
        s, step = 0.0, 0.25
        while s < 1.0:
            target = min(1.0, s + step)
            try:
                star = solve_star(M, X, Z, mixed(target) if target < 1.0 else kappa, alpha_mlt=alpha, guess=star)
                s, step = target, min(2.0 * step, 0.5)
            except ModelError:
                step *= 0.5
                if step < _SMALLEST_OPACITY_STEP:
                    raise
    except ModelError:
        raise ModelError(f"{first_error}; continuation from the built-in opacity law did not reach it either") \
            from None
    return star


def solved_stars(M, X, Z, kappa, *, alpha_mlt=1.8, age=0.0, past_end: str = "refuse",
                 dXc: float = 0.02) -> list[StarStructure]:
    """Solved structures of ``n`` samples at their ages on the main sequence.

    Parameters
    ----------
    M : array_like [n], g
    X, Z : array_like [n] or scalar
        Hydrogen and metal mass fractions (uniform through each star).
    kappa : callable
        Opacity ``kappa(rho, T, X, Z)`` in cm^2/g (the opacity stage, bound).
    alpha_mlt : array_like [n] or scalar
        Mixing-length parameter.
    age : array_like [n] or scalar, Gyr
        Age since the zero-age main sequence (0: zero-age).
    past_end : {"refuse", "last"}
        What an age past the end of this star's main sequence gives: a
        ModelError ("refuse"), or the track's last model, at central hydrogen
        exhaustion ("last"; for a caller that has already placed the age on
        the main sequence by another estimate of the lifetime, such as an
        interpolated track grid, and only needs the nearest solved star).
    dXc : float
        Step control of the evolution of aged stars (largest change of X per
        step, :func:`radwalk.physics.structure.evolution.evolve`; 0.02 there
        too).  Halving it changes L at 4.57 Gyr by 1e-5 (measured, evolve's
        notes), so a caller that needs many aged stars cheaply may take 0.05.

    Returns
    -------
    list of StarStructure
        One per sample, in the input order.

    Raises
    ------
    ConfigError
        For a negative age, or inputs outside the solver's range.
    ModelError
        When a star does not converge (the message names it).
    """
    M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
    n = M.size
    X, Z, alpha, age = (np.broadcast_to(np.asarray(v, dtype=float).reshape(-1) if np.ndim(v) else v, (n,))
                        for v in (X, Z, alpha_mlt, age))
    if past_end not in ("refuse", "last"):
        raise ConfigError(f"past_end must be 'refuse' or 'last', not {past_end!r}")
    if np.any((age < 0.0) | ~np.isfinite(age)):
        raise ConfigError(f"age = {float(age[(age < 0) | ~np.isfinite(age)][0]):g} Gyr: an age must be >= 0")
    okey = opacity_key(kappa)
    out: list = [None] * n
    for i in np.argsort(M, kind="stable"):  # increasing mass: each star starts from its solved neighbour
        key = _key(M[i], X[i], Z[i], alpha[i], okey)
        law = _sample_opacity(kappa, i)
        zams = _solve_one(M[i], X[i], Z[i], law, alpha[i], key)
        out[i] = zams if age[i] == 0.0 else _evolved(zams, M[i], X[i], Z[i], law, alpha[i], float(age[i]), key,
                                                     past_end, dXc)
    return out


def _evolved(zams: StarStructure, M, X, Z, kappa, alpha, age_gyr: float, key, past_end="refuse",
             dXc=0.02) -> StarStructure:
    """The star at ``age_gyr`` on its main-sequence track (kept in memory like the zero-age ones).

    Raises
    ------
    ModelError
        When the age lies beyond the end of the main sequence (central hydrogen exhausted) for this mass and
        composition: the models here are main-sequence stars and say so rather than extrapolate.  With
        ``past_end="last"`` the track's last model is returned instead.
    """
    from radwalk.physics.structure.evolution import X_C_END, evolve

    aged_key = key + (round(age_gyr, 9), float(dXc))
    if aged_key in _MEMORY:
        return _recalled(aged_key)
    last_key = aged_key + ("last",)  # a past-the-end answer is kept apart: a refusing caller must still refuse
    if past_end == "last" and last_key in _MEMORY:
        return _recalled(last_key)
    gyr = 1e9 * k.YEAR
    track = evolve(M, X, Z, kappa, alpha_mlt=alpha, age_end=age_gyr * gyr, start=zams, dXc=dXc)
    if track.age[-1] < age_gyr * gyr * (1.0 - 1e-9):
        if past_end == "last":
            return _remember(last_key, track.models[-1])
        raise ModelError(
            f"age {age_gyr:g} Gyr is beyond the end of the main sequence of a {M / k.M_SUN:.4g} M_sun star with "
            f"X = {X:.4g}, Z = {Z:.4g}: central hydrogen falls to {X_C_END:g} at "
            f"{track.age[-1] / gyr:.4g} Gyr ({track.stop_reason})")
    return _remember(aged_key, track.models[-1])
