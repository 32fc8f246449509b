"""Main-sequence evolution: quasi-static steps of the structure on the nuclear time scale.

A main-sequence star changes on the nuclear time scale, millions of times its
thermal time, so its evolution is a sequence of models in thermal and
hydrostatic equilibrium that differ only in the hydrogen profile X(m)
(Kippenhahn, Weigert & Weiss 2012, *Stellar Structure and Evolution*, ch. 30;
Hansen, Kawaler & Trimble 2004, sect. 2.4).  One step of length dt:

1. *Predictor*: burn X(m) with the hydrogen consumption rate dX/dt of the pp
   chain and the CNO cycle (:func:`radwalk.physics.nuclear.nuclear_rates`) of
   the old model, mix every convective zone of the old model, and solve the
   structure with that profile (Newton started from the old model).
2. *Corrector*: burn the old profile again with the mean of the old and the
   predicted rates (the trapezoid rule in time, second order: Heun's method),
   mix the convective zones of the predicted model, and solve again.

Convective regions are mixed instantly (their time scale is months, the
step's millions of years): X is set to its mass-weighted mean over each run of
convective mesh points, which conserves the hydrogen mass.  The convective
core is optionally extended by a step overshoot of alpha_ov pressure scale
heights beyond its Schwarzschild boundary, with the distance limited to the
core's radius for small cores (d = alpha_ov min(H_P, r_cc); common practice,
no source).  Hydrogen burns only where the rates say; helium burning,
diffusion and mass loss are not included.

The time step is set so that no point's X falls by more than ``dXc`` and
none by more than ``15 dXc`` of its own value (0.3 at the default 0.02), and
grows by at most a factor 2 per step; a step whose solve fails is halved.

The gravothermal energy release eps_g = -T ds/dt = -c_P T (dln T/dt -
nabla_ad dln P/dt) at fixed m (Kippenhahn, Weigert & Weiss 2012, ch. 4; at
fixed composition) is included by default: the corrector takes it from the
old and predicted models, the predictor reuses the previous step's.  Measured
on the calibrated 1 M_sun track it is -3e-4 of L and changes L at 4.57 Gyr by
1.5e-4; it costs nothing, so it stays.

Where the tracks stop, and why: at central hydrogen exhaustion, X_c <= 0.01
by default; the accuracy measured and what happens past exhaustion are in the
Notes of :func:`evolve`.

Validity: the solver's range (0.5-20 M_sun, Z 1e-4..0.04, X0 0.5-0.8), core
hydrogen burning only; no diffusion, no mass loss, Schwarzschild boundaries
(no semiconvection), instantaneous mixing.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import PchipInterpolator

from radwalk import constants as const
from radwalk.errors import ConfigError, ModelError
from radwalk.physics.nuclear import nuclear_rates
from radwalk.physics.structure.solver import StarStructure, solve_star

__all__ = ["Track", "TrackPoint", "evolve", "mixed_zones", "overshoot_mass_fraction", "mix", "gravothermal_rate",
           "X_C_END"]

X_C_END = 0.01
"""Default central hydrogen fraction where a track stops (central hydrogen exhaustion)."""

_REL_PER_DXC = 15.0  # largest relative change of X at any point per step, in units of dXc
_GROWTH = 2.0  # largest growth of the time step from one step to the next
_MAX_HALVINGS = 6  # a failed step is retried with dt / 2, ... / 64 before the track stops
_MAX_STEPS = 400  # a track needs ~40 steps at dXc = 0.02; this only stops a runaway
_X_ACTIVE = 1e-6  # points with less hydrogen than this do not limit the step


@dataclass(frozen=True)
class TrackPoint:
    """Scalars of a track at one age (interpolated between steps by :meth:`Track.at_age`).

    Attributes
    ----------
    age : float, s
    X_c : float
        Central hydrogen mass fraction.
    L : float, erg/s
    R : float, cm
    T_eff : float, K
    T_c : float, K
    rho_c : float, g/cm^3
    q_cc : float
        Convective core mass fraction (Schwarzschild boundary; 0 when radiative).
    q_mixed : float
        Mass fraction of the mixed core (convective core plus overshoot).
    r_env : float
        Base of the outermost convection zone, r / R (1 when there is none).
    q_env : float
        Mass fraction at that base.
    """

    age: float
    X_c: float
    L: float
    R: float
    T_eff: float
    T_c: float
    rho_c: float
    q_cc: float
    q_mixed: float
    r_env: float
    q_env: float


_SCALARS = tuple(TrackPoint.__dataclass_fields__)
_LOG_SCALARS = {"L", "R", "T_eff", "T_c", "rho_c"}  # interpolated in the logarithm


@dataclass
class Track:
    """A main-sequence track: one row per step, from the zero-age model (row 0) on.

    Attributes
    ----------
    M : float, g
    X0, Z : float
        Initial (uniform) hydrogen and metal mass fractions.
    alpha_mlt, alpha_ov : float
        Mixing-length and step-overshoot parameters (pressure scale heights).
    dXc : float
        Step control: largest change of X at any point per step.
    age : ndarray [n_steps], s
    X_c, L, R, T_eff, T_c, rho_c, q_cc, q_mixed, r_env, q_env : ndarray [n_steps]
        As in :class:`TrackPoint` (L erg/s, R cm, temperatures K, rho_c g/cm^3).
    L_grav : ndarray [n_steps], erg/s
        Gravothermal luminosity, the mass integral of eps_g (0 when not included).
    models : list of StarStructure
        The solved models, one per step.
    stop_reason : str
        Why the track ends.
    cpu_seconds : float
        Process CPU time of the whole track, s.
    """

    M: float
    X0: float
    Z: float
    alpha_mlt: float
    alpha_ov: float
    dXc: float
    age: np.ndarray
    X_c: np.ndarray
    L: np.ndarray
    R: np.ndarray
    T_eff: np.ndarray
    T_c: np.ndarray
    rho_c: np.ndarray
    q_cc: np.ndarray
    q_mixed: np.ndarray
    r_env: np.ndarray
    q_env: np.ndarray
    L_grav: np.ndarray
    models: list = field(repr=False)
    stop_reason: str = ""
    cpu_seconds: float = field(default=0.0, compare=False)

    @property
    def n_steps(self) -> int:
        """Number of models (the zero-age model included)."""
        return int(self.age.size)

    def at_age(self, age: float) -> TrackPoint:
        """The track's scalars at ``age``, interpolated between steps.

        Parameters
        ----------
        age : float, s
            Between 0 and the last step's age.

        Returns
        -------
        TrackPoint
            Monotone cubic (PCHIP) interpolation in age of every scalar (of
            the logarithm of L, R, T_eff, T_c and rho_c).

        Raises
        ------
        ConfigError
            If ``age`` is outside the track.
        """
        age = float(age)
        if not (0.0 <= age <= self.age[-1] * (1.0 + 1e-12)):
            raise ConfigError(f"age {age / (1e9 * const.YEAR):.4g} Gyr is outside the track "
                              f"(0..{self.age[-1] / (1e9 * const.YEAR):.4g} Gyr)")
        age = min(age, float(self.age[-1]))
        out = {"age": age}
        for name in _SCALARS[1:]:
            y = getattr(self, name)
            if self.n_steps == 1:
                out[name] = float(y[0])
                continue
            if name in _LOG_SCALARS:
                out[name] = float(np.exp(PchipInterpolator(self.age, np.log(y))(age)))
            else:
                out[name] = float(PchipInterpolator(self.age, y)(age))
        return TrackPoint(**out)

    def main_sequence_lifetime(self, X_c: float = X_C_END) -> float:
        """Age at which the central hydrogen fraction falls to ``X_c``, s.

        Parameters
        ----------
        X_c : float
            Central hydrogen fraction that defines the end (default 0.01).

        Returns
        -------
        float, s
            Monotone cubic interpolation of age against X_c between steps;
            NaN if the track stopped before reaching ``X_c``.

        Notes
        -----
        With a radiative core the answer depends on ``X_c`` noticeably (1 M_sun:
        +10 % from 0.01 to 1e-5, see :func:`evolve`).
        """
        if not (self.X_c[-1] <= X_c <= self.X_c[0]):
            return math.nan
        # X_c falls monotonically along a track; PCHIP needs increasing abscissae.
        xc = self.X_c[::-1]
        keep = np.concatenate([[True], np.diff(xc) > 0.0])
        return float(PchipInterpolator(xc[keep], self.age[::-1][keep])(X_c))


# ---------------------------------------------------------------------------- mixing
def _mass_weights(m):
    """Trapezoid weights of the mesh points, g, [n]: sum(w X) is the hydrogen mass."""
    dm = np.diff(m)
    w = np.zeros(m.size)
    w[:-1] += 0.5 * dm
    w[1:] += 0.5 * dm
    return w


def mixed_zones(star: StarStructure, alpha_ov: float = 0.0) -> list[tuple[int, int]]:
    """Runs of mesh points mixed instantly: the convective zones, the core's extended by overshoot.

    Parameters
    ----------
    star : StarStructure
    alpha_ov : float
        Step overshoot beyond the convective core, in pressure scale heights
        at its boundary; the distance is alpha_ov min(H_P, r_cc).

    Returns
    -------
    list of (int, int)
        Index ranges [first, last] (inclusive) of mixed points, from the centre out;
        a convective zone the overshoot reaches joins the core.
    """
    conv = np.asarray(star.convective, dtype=bool)
    edges = np.flatnonzero(np.diff(np.concatenate([[0], conv.astype(np.int8), [0]])))
    zones = [(int(a), int(b) - 1) for a, b in zip(edges[::2], edges[1::2])]
    q_ov = overshoot_mass_fraction(star, alpha_ov)
    if q_ov == 0.0 or zones[0][1] == conv.size - 1:
        return zones
    core_end = max(zones[0][1], int(np.searchsorted(star.q, q_ov, side="right")) - 1)
    out = [(0, core_end)]
    for a, b in zones[1:]:
        if a <= out[0][1] + 1:
            out[0] = (0, max(out[0][1], b))
        else:
            out.append((a, b))
    return out


def overshoot_mass_fraction(star: StarStructure, alpha_ov: float) -> float:
    """Mass fraction reached by the convective core plus its step overshoot (0 when radiative).

    Parameters
    ----------
    star : StarStructure
    alpha_ov : float
        Pressure scale heights; the distance beyond the core radius r_cc is
        alpha_ov min(H_P(r_cc), r_cc).

    Returns
    -------
    float
        q at r_cc + d (linear interpolation in r), at most 1.
    """
    q_cc = star.convective_core_mass_fraction()
    if q_cc == 0.0 or alpha_ov <= 0.0:
        return q_cc
    r_cc = float(np.interp(q_cc, star.q, star.r))
    h_p = float(np.interp(r_cc, star.r, star.H_P))
    return float(np.interp(r_cc + alpha_ov * min(h_p, r_cc), star.r, star.q))


def mix(values, weights, zones):
    """Mass-weighted means of ``values`` over each zone.

    Parameters
    ----------
    values : ndarray [n]
    weights : ndarray [n], g
        Trapezoid weights of the points.
    zones : list of (int, int)
        Inclusive index ranges (:func:`mixed_zones`).

    Returns
    -------
    ndarray [n]
        ``values`` with every zone replaced by its mean; sum(weights * values) is unchanged.
    """
    out = np.array(values, dtype=float)
    for a, b in zones:
        if b > a:
            w = weights[a:b + 1]
            out[a:b + 1] = np.dot(w, out[a:b + 1]) / w.sum()
    return out


def gravothermal_rate(old: StarStructure, new: StarStructure, dt: float) -> np.ndarray:
    """eps_g = -T ds/dt between two models on the same mass mesh, erg/(g s), [n].

    Parameters
    ----------
    old, new : StarStructure
        Models at the start and end of a step.
    dt : float, s

    Returns
    -------
    ndarray [n]
        -c_P T (dln T - nabla_ad dln P) / dt with c_P, T and nabla_ad the
        means of the two models (KWW 2012, ch. 4; the change of
        composition is not counted as heat).  0 at the photosphere, whose T
        and P the boundary conditions set.
    """
    cp_t = 0.5 * (old.c_P * old.T + new.c_P * new.T)
    nad = 0.5 * (old.nabla_ad + new.nabla_ad)
    eg = -cp_t * (np.log(new.T / old.T) - nad * np.log(new.P / old.P)) / dt
    eg[-1] = 0.0
    return eg


def _integral(y, m):
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(m)))


# ---------------------------------------------------------------------------- evolution
def evolve(M, X0, Z, kappa, *, alpha_mlt=1.8, alpha_ov=0.0, dXc=0.02, X_end=X_C_END, age_end=None,
           gravothermal=True, start=None, n_mesh=400, max_steps=_MAX_STEPS) -> Track:
    """Evolve a star of uniform initial composition along the main sequence.

    Parameters
    ----------
    M : float, g
        Mass (0.5-20 M_sun, the solver's range).
    X0, Z : float
        Initial hydrogen (0.5-0.8) and metal (1e-4..0.04) mass fractions.
    kappa : callable
        Opacity ``kappa(rho, T, X, Z)`` in cm^2/g.
    alpha_mlt : float
        Mixing-length parameter.
    alpha_ov : float
        Step overshoot of the convective core, pressure scale heights (0-0.5).
    dXc : float
        Largest change of X at any point per step (0.001-0.05); the central
        X, where burning is fastest, sets it on the main sequence.
    X_end : float
        The track ends at the first step with X_c <= X_end (0 < X_end < X0).
    age_end : float, s, optional
        End at exactly this age instead, if it comes first (the last step is
        shortened to land on it).
    gravothermal : bool
        Include eps_g = -T ds/dt (see the module docstring).
    start : StarStructure, optional
        A solved model to start Newton's method of the zero-age model from
        (default: the solver's polytrope start).
    n_mesh : int
        Mesh points of the solver.
    max_steps : int
        Steps before the track is given up (stop_reason says so).

    Returns
    -------
    Track

    Raises
    ------
    ConfigError
        For inputs outside the ranges above or the solver's.
    ModelError
        If the zero-age model cannot be solved.  A later step that fails
        even with dt / 64 ends the track instead (stop_reason says where).

    Notes
    -----
    Accuracy (measured, calibrated 1 M_sun track): halving dXc changes L at
    4.57 Gyr by 1e-5 and the lifetime by 9e-4 (4.7e-4 at 5 M_sun); 800 mesh points
    instead of the solver's 400 change L at 4.57 Gyr by 9.7e-4 and R by 7.9e-4
    (5e-4 and 8e-4 on the zero-age sequence: the composition profile adds ~5e-4)
    and the lifetime by 6.5e-4.  The fixed mesh (20 points below m/M = 0.05,
    ~60 below 0.3) resolves the burnt core and the profile a receding
    convective core leaves behind; no remeshing is done.

    Where the tracks stop, and why: at the first step with X_c <= ``X_end``
    (default 0.01, central hydrogen exhaustion).  Past it a convective core
    vanishes near X_c ~ 1e-3 and the star contracts on its thermal time scale (the
    overall contraction), which is not quasi-static: at 5 M_sun the steps
    collapse at X_c = 4e-4 (L falls by half within centuries of model time and
    Newton's method fails even at dt ~ 100 yr).  A radiative core (1 M_sun) goes
    on smoothly to X_c = 1e-5, but slowly, since the pp rate falls as X^2: from
    X_c = 0.01 to 1e-5 adds 10 % to the age, so a lifetime depends on the X_c
    that defines it (``Track.main_sequence_lifetime`` takes it as an argument).
    Hydrogen burning in a shell is not followed further.
    """
    t0 = time.process_time()
    M, X0, Z = float(M), float(X0), float(Z)
    if not (0.001 <= dXc <= 0.05):
        raise ConfigError(f"dXc = {dXc:g} is outside 0.001..0.05")
    if not (0.0 <= alpha_ov <= 0.5):
        raise ConfigError(f"alpha_ov = {alpha_ov:g} is outside 0..0.5 pressure scale heights")
    if not (0.0 < X_end < X0):
        raise ConfigError(f"X_end = {X_end:g} must lie between 0 and X0 = {X0:g}")
    if age_end is not None and not age_end > 0.0:
        raise ConfigError(f"age_end = {age_end:g} s must be positive")
    solve = dict(alpha_mlt=alpha_mlt, n_mesh=n_mesh)
    star = solve_star(M, X0, Z, kappa, guess=start, **solve)
    weights = _mass_weights(star.m)
    zones = mixed_zones(star, alpha_ov)
    X = mix(star.X, weights, zones)
    rows = [_row(0.0, star, alpha_ov, 0.0)]
    models = [star]
    age = 0.0
    dt_prev = math.inf
    eps_g = None
    stop = ""
    while True:
        if star.X[0] <= X_end:
            stop = f"central hydrogen exhausted: X_c = {star.X[0]:.4g} <= {X_end:g}"
            break
        if age_end is not None and age >= age_end * (1.0 - 1e-12):
            stop = f"reached the requested age {age / (1e9 * const.YEAR):.6g} Gyr"
            break
        if len(models) > max_steps:
            stop = f"gave up after {max_steps} steps at X_c = {star.X[0]:.4g}"
            break
        rate = mix(nuclear_rates(star.rho, star.T, X, Z).dXdt, weights, zones)
        dt = min(_step_limit(X, rate, dXc), _GROWTH * dt_prev)
        if age_end is not None:
            dt = min(dt, age_end - age)
        result = None
        for _ in range(_MAX_HALVINGS + 1):
            try:
                result = _step(star, X, rate, dt, weights, eps_g, Z, kappa, alpha_ov, gravothermal, M, X0, solve)
                break
            except ModelError as exc:
                last_error = exc
                dt *= 0.5
        if result is None:
            stop = (f"steps collapsed at age {age / (1e9 * const.YEAR):.4g} Gyr, X_c = {star.X[0]:.4g}: "
                    f"no solution even with dt = {dt / const.YEAR:.3g} yr ({last_error})")
            break
        star, X, zones, eps_g = result
        age += dt
        dt_prev = dt
        models.append(star)
        rows.append(_row(age, star, alpha_ov, _integral(eps_g, star.m) if eps_g is not None else 0.0))
    cols = {name: np.array([r[name] for r in rows]) for name in rows[0]}
    return Track(M=M, X0=X0, Z=Z, alpha_mlt=float(alpha_mlt), alpha_ov=float(alpha_ov), dXc=float(dXc),
                 models=models, stop_reason=stop, cpu_seconds=time.process_time() - t0, **cols)


def _step_limit(X, rate, dXc):
    """Time step that keeps every point's change of X below dXc and 15 dXc of its X."""
    burn = -rate
    active = (burn > 0.0) & (X > _X_ACTIVE)
    if not np.any(active):
        raise ModelError("no hydrogen burning left in the star: the step cannot be set")
    limit = np.minimum(dXc, _REL_PER_DXC * dXc * X[active])
    return float(np.min(limit / burn[active]))


def _step(star, X, rate, dt, weights, eps_g, Z, kappa, alpha_ov, gravothermal, M, X0, solve):
    """One predictor-corrector step; returns (model, X profile, mixed zones, eps_g)."""
    zones_old = mixed_zones(star, alpha_ov)
    X_pred = np.maximum(mix(X + dt * rate, weights, zones_old), 0.0)
    pred = solve_star(M, X0, Z, kappa, X_profile=X_pred, guess=star,
                      eps_extra=eps_g if gravothermal else None, **solve)
    rate_pred = nuclear_rates(pred.rho, pred.T, X_pred, Z).dXdt
    zones = mixed_zones(pred, alpha_ov)
    X_new = np.maximum(mix(X + 0.5 * dt * (rate + rate_pred), weights, zones), 0.0)
    eps_g = gravothermal_rate(star, pred, dt) if gravothermal else None
    new = solve_star(M, X0, Z, kappa, X_profile=X_new, guess=pred, eps_extra=eps_g, **solve)
    if gravothermal:
        eps_g = gravothermal_rate(star, new, dt)
    return new, X_new, mixed_zones(new, alpha_ov), eps_g


def _row(age, star, alpha_ov, L_grav):
    return {"age": age, "X_c": float(star.X[0]), "L": star.L_surface, "R": star.R, "T_eff": star.T_eff,
            "T_c": star.T_c, "rho_c": star.rho_c, "q_cc": star.convective_core_mass_fraction(),
            "q_mixed": overshoot_mass_fraction(star, alpha_ov), "r_env": star.envelope_base_radius(),
            "q_env": star.envelope_base_mass_fraction(), "L_grav": L_grav}
