"""Solar calibration: the mixing length and initial helium that make a 1 M_sun track the Sun.

A standard solar model (Bahcall, Serenelli & Basu 2005, ApJ 621, L85;
Kippenhahn, Weigert & Weiss 2012, ch. 31) has two free numbers, the
mixing-length parameter alpha_mlt (which sets the radius through the
superadiabatic layer) and the initial helium mass fraction Y0 (which sets the
luminosity through the mean molecular weight).  Both are chosen so that a
1 M_sun star evolved from the zero-age main sequence to the Sun's age has the
Sun's luminosity and radius; the initial metallicity follows from the
measured surface ratio Z/X, since without diffusion (not modelled here) the
surface keeps its initial composition:

    X0 = (1 - Y0) / (1 + (Z/X)),   Z0 = (Z/X) X0.

The defaults: (Z/X)_sun = 0.0181 (Asplund, Grevesse, Sauval & Scott 2009,
ARA&A 47, 481, present photosphere; from memory); the age 4.57 Gyr after the
zero-age main sequence, the meteoritic age (oldest solids, 4.5682 Gyr,
Bouvier & Wadhwa 2010, Nature Geoscience 3, 637; from memory) rounded, the
pre-main-sequence tens of Myr neglected; L and R the IAU 2015 nominal values
(:mod:`radwalk.constants`).

The two conditions are solved by Newton's method in (alpha_mlt, Y0) with a
Jacobian from forward differences of two extra tracks, updated by Broyden's
rank-one formula afterwards (Dennis & Schnabel 1983, ch. 8), so that each
further iteration costs one track.

Validity: that of :func:`radwalk.physics.structure.evolution.evolve`; the
calibrated pair belongs to the opacity law, EOS and nuclear rates used (an
alpha_mlt far from the usual 1.7-2.2 signals an opacity error absorbed by it).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from radwalk import constants as const
from radwalk.errors import ModelError
from radwalk.physics.opacity import default_kappa
from radwalk.physics.structure.evolution import Track, evolve
from radwalk.physics.structure.solver import ALPHA_RANGE, X_RANGE, StarStructure

__all__ = ["SolarCalibration", "calibrate_sun", "composition_from_helium", "SOLAR_Z_OVER_X", "SOLAR_AGE",
           "CALIBRATED_ALPHA", "CALIBRATED_Y0"]

SOLAR_Z_OVER_X = 0.0181
"""Present photospheric (Z/X)_sun, Asplund et al. 2009 (from memory)."""

SOLAR_AGE = 4.57e9 * const.YEAR
"""Age of the Sun since the zero-age main sequence, s: the meteoritic age (Bouvier & Wadhwa 2010) rounded."""

# The result of calibrate_sun() with its defaults (default opacity, 400 points, dXc = 0.02), to 5 digits.
# The calibration starts from it, so a change of the physics costs iterations rather than a wrong answer;
# tests/physics/structure/test_evolution.py re-derives it from a distant start (marked slow).
CALIBRATED_ALPHA = 1.1564
CALIBRATED_Y0 = 0.29648

_STEP_ALPHA = 0.05  # forward-difference steps of the Jacobian
_STEP_Y0 = 0.004
_MAX_CHANGE = (0.5, 0.04)  # largest Newton change of (alpha, Y0) per iteration


def composition_from_helium(Y0: float, Z_over_X: float = SOLAR_Z_OVER_X) -> tuple[float, float]:
    """Hydrogen and metal mass fractions for a helium fraction and a ratio Z/X.

    Parameters
    ----------
    Y0 : float
        Helium mass fraction.
    Z_over_X : float
        Metal-to-hydrogen mass ratio.

    Returns
    -------
    (X, Z) : tuple of float
        X = (1 - Y0) / (1 + Z/X), Z = (Z/X) X.
    """
    X = (1.0 - Y0) / (1.0 + Z_over_X)
    return X, Z_over_X * X


@dataclass
class SolarCalibration:
    """A calibrated solar track and what it says about the Sun.

    Attributes
    ----------
    alpha_mlt : float
        Calibrated mixing-length parameter.
    Y0, X0, Z0 : float
        Initial (and, without diffusion, surface) helium, hydrogen and metal fractions.
    Z_over_X : float
    age : float, s
    track : Track
        The calibrated track, ending at ``age``.
    L_error, R_error : float
        L / L_sun - 1 and R / R_sun - 1 of the calibrated model.
    iterations : int
        Newton iterations (one track each, plus two for the first Jacobian).
    tracks : int
        Tracks computed.
    history : list of tuple
        (alpha_mlt, Y0, ln L/L_sun, ln R/R_sun) of every track computed.
    cpu_seconds : float
    """

    alpha_mlt: float
    Y0: float
    X0: float
    Z0: float
    Z_over_X: float
    age: float
    track: Track = field(repr=False)
    L_error: float
    R_error: float
    iterations: int
    tracks: int
    history: list = field(repr=False)
    cpu_seconds: float = 0.0

    @property
    def model(self) -> StarStructure:
        """The solved Sun at ``age``."""
        return self.track.models[-1]

    @property
    def T_c(self) -> float:
        """Central temperature, K."""
        return self.model.T_c

    @property
    def rho_c(self) -> float:
        """Central density, g/cm^3."""
        return self.model.rho_c

    @property
    def X_c(self) -> float:
        """Central hydrogen fraction."""
        return float(self.model.X[0])

    @property
    def envelope_base(self) -> float:
        """Base of the convective envelope, r / R."""
        return self.model.envelope_base_radius()

    @property
    def surface_X(self) -> float:
        """Surface hydrogen fraction (the initial one: no diffusion)."""
        return float(self.model.X[-1])

    @property
    def surface_Y(self) -> float:
        """Surface helium fraction, 1 - X - Z (the initial Y0: no diffusion)."""
        return 1.0 - self.surface_X - self.Z0


def _misfit(track):
    return np.array([math.log(track.L[-1] / const.L_SUN), math.log(track.R[-1] / const.R_SUN)])


def calibrate_sun(kappa=default_kappa, *, alpha_mlt=None, Y0=None, Z_over_X=SOLAR_Z_OVER_X, age=SOLAR_AGE,
                  tol=1e-4, max_iter=8, dXc=0.02, n_mesh=400, gravothermal=True) -> SolarCalibration:
    """Find alpha_mlt and Y0 so that 1 M_sun at ``age`` has L_sun and R_sun.

    Parameters
    ----------
    kappa : callable
        Opacity ``kappa(rho, T, X, Z)``, cm^2/g (default: the built-in law).
    alpha_mlt, Y0 : float, optional
        Starting values (default :data:`CALIBRATED_ALPHA`, :data:`CALIBRATED_Y0`).
    Z_over_X : float
        Surface (= initial) metal-to-hydrogen ratio.
    age : float, s
        Age since the zero-age main sequence.
    tol : float
        Largest |ln L/L_sun| and |ln R/R_sun| accepted.
    max_iter : int
        Newton iterations before giving up.
    dXc, n_mesh, gravothermal
        Passed to :func:`~radwalk.physics.structure.evolution.evolve`.

    Returns
    -------
    SolarCalibration

    Raises
    ------
    ModelError
        If the iteration does not reach ``tol`` within ``max_iter`` iterations,
        or leaves the solver's range of alpha_mlt and X.
    """
    t0 = time.process_time()
    p = np.array([CALIBRATED_ALPHA if alpha_mlt is None else alpha_mlt, CALIBRATED_Y0 if Y0 is None else Y0],
                 dtype=float)
    history = []
    start = [None]

    def run(params):
        a, y = float(params[0]), float(params[1])
        X0, Z0 = composition_from_helium(y, Z_over_X)
        if not (ALPHA_RANGE[0] <= a <= ALPHA_RANGE[1] and X_RANGE[0] <= X0 <= X_RANGE[1]):
            raise ModelError(f"solar calibration left the solver's range: alpha_mlt = {a:.4g}, X0 = {X0:.4g}")
        tr = evolve(const.M_SUN, X0, Z0, kappa, alpha_mlt=a, age_end=age, dXc=dXc, n_mesh=n_mesh,
                    gravothermal=gravothermal, start=start[0])
        if not tr.age[-1] >= age * (1.0 - 1e-9):
            raise ModelError(f"solar track (alpha_mlt = {a:.4g}, Y0 = {y:.4g}) stopped before the age: "
                             f"{tr.stop_reason}")
        start[0] = tr.models[0]
        f = _misfit(tr)
        history.append((a, y, float(f[0]), float(f[1])))
        return tr, f

    track, f = run(p)
    J = None
    iterations = 0
    while np.max(np.abs(f)) > tol:
        if iterations >= max_iter:
            raise ModelError(f"solar calibration did not converge in {max_iter} iterations: "
                             f"alpha_mlt = {p[0]:.5g}, Y0 = {p[1]:.5g}, ln L/L_sun = {f[0]:.2e}, "
                             f"ln R/R_sun = {f[1]:.2e}")
        if J is None:
            J = np.empty((2, 2))
            for j, h in enumerate((_STEP_ALPHA, _STEP_Y0)):
                dp = np.zeros(2)
                dp[j] = h
                J[:, j] = (run(p + dp)[1] - f) / h
        step = np.linalg.solve(J, -f)
        scale = min(1.0, *(c / max(abs(s), 1e-300) for c, s in zip(_MAX_CHANGE, step)))
        step *= scale
        track, f_new = run(p + step)
        # Broyden's update keeps the Jacobian consistent with the step just taken.
        J += np.outer(f_new - f - J @ step, step) / float(step @ step)
        p, f = p + step, f_new
        iterations += 1
    X0, Z0 = composition_from_helium(float(p[1]), Z_over_X)
    return SolarCalibration(alpha_mlt=float(p[0]), Y0=float(p[1]), X0=X0, Z0=Z0, Z_over_X=float(Z_over_X),
                            age=float(age), track=track, L_error=float(np.expm1(f[0])),
                            R_error=float(np.expm1(f[1])), iterations=iterations, tracks=len(history),
                            history=history, cpu_seconds=time.process_time() - t0)
