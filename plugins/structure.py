"""Built-in solved-star components: the profile and the relation of a star solved from the structure equations.

Both are thin adapters onto :mod:`radwalk.physics.structure`: the four
structure equations on a mass mesh (Henyey relaxation), an ideal-gas +
radiation equation of state with Saha ionisation, pp + CNO energy generation,
mixing-length convection and an Eddington grey atmosphere (see
docs/physics.md).  The opacity is the opacity stage, so any law — built-in,
tabulated or a user's plugin — shapes the solved star.

Both components solve main-sequence stars at an ``age`` in Gyr: 0 is the
zero-age main sequence; an older star is evolved along its track (burning
X(m), mixing convective cores) and an age past central hydrogen exhaustion is
refused with a clear error.  A solved star is slow next to a polytrope
(0.1-0.7 s of CPU zero-age, 2-6 s for a track), so the fits keep the gridded
homology relation as their default until a shipped model grid makes the
solved star fast enough to sample.
"""

from __future__ import annotations

import numpy as np

from radwalk import constants as k
from radwalk.host.components import Profile
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Prior, Validity
from radwalk.physics.structure.models import solved_stars
from radwalk.physics.structure.solver import ALPHA_RANGE, MASS_RANGE, X_RANGE, Z_RANGE

ALPHA_DEFAULT = 1.8  # mixing length in pressure scale heights (common practice, no source; a solar calibration sets it)

_VALIDITY = Validity(
    mass=MASS_RANGE,
    X=X_RANGE,
    Z=Z_RANGE,
    note="main-sequence stars solved from the structure equations; the solver refuses masses, "
    "compositions and mixing lengths outside the ranges its tests cover, and the analytic opacity law is "
    "its main error (see docs/physics.md)",
)


def _params():
    return (
        Param(name="alpha_mlt", unit="", lower=ALPHA_RANGE[0], upper=ALPHA_RANGE[1], default=ALPHA_DEFAULT,
              description="mixing-length parameter (mixing length over pressure scale height)",
              prior=Prior("uniform", 1.2, 2.4), sampled=False, latex=r"$\alpha_\mathrm{MLT}$"),
        Param(name="age", unit="Gyr", lower=0.0, upper=15.0, default=0.0,
              description="age since the zero-age main sequence",
              prior=Prior("uniform", 0.0, 15.0), sampled=False, latex=r"$t$"),
    )


def _flat(a, n):
    a = np.asarray(a, dtype=float)
    return np.broadcast_to(a.reshape(-1) if a.ndim else a, (n,))


class SolvedProfile:
    """The interior of a star solved from the structure equations (R and L come out of the solution)."""

    name = "solved"
    description = ("star solved from the structure equations (Saha EOS, pp + CNO, mixing-length convection, "
                   "grey atmosphere) with the chosen opacity law")
    params = _params()
    validity = _VALIDITY
    sets_radius = True  # the solved R and L replace whatever the relation predicted

    def profile(self, M, R, X, Z, opacity=None, alpha_mlt=ALPHA_DEFAULT, age=0.0) -> Profile:
        """Solved structures of ``n`` stars.

        Parameters
        ----------
        M : array_like [n], g
        R : array_like [n], cm
            Ignored: the solution sets the radius.
        X, Z : array_like [n]
        opacity : callable
            The bound opacity stage ``kappa(rho, T, X, Z)``, cm^2/g.
        alpha_mlt : float or array_like [n]
        age : float or array_like [n], Gyr

        Returns
        -------
        Profile
            Arrays [n, nmesh] from the centre to the photosphere, with the
            luminosity profile, the actual gradient, convective flags and
            velocities, the internal energy and the turnover times as scalars.
        """
        if opacity is None:
            raise TypeError("the solved profile needs the opacity stage (opacity=...)")
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        n = M.size
        X, Z = _flat(X, n), _flat(Z, n)
        stars = solved_stars(M, X, Z, opacity, alpha_mlt=alpha_mlt, age=age)

        def stack(attr):
            return np.stack([getattr(s, attr) for s in stars])

        P, T = stack("P"), stack("T")
        beta = 1.0 - k.A_RAD * T**4 / (3.0 * P)
        year = k.YEAR
        scalars = {
            "convective_turnover_time": np.array([s.local_turnover_time() for s in stars]) / 86400.0,
            "convective_turnover_time_global": np.array([s.global_turnover_time() for s in stars]) / 86400.0,
            "convective_crossing_time": np.array([s.convective_crossing_time("all") for s in stars]) / year,
            "convective_core_mass_fraction": np.array([s.convective_core_mass_fraction() for s in stars]),
            "convective_envelope_base_radius": np.array([s.envelope_base_radius() for s in stars]),
        }
        return Profile(
            r=stack("r"), m=stack("m"), rho=stack("rho"), P=P, T=T, beta=beta,
            M=M.copy(), R=np.array([s.R for s in stars]), X=np.array(X, dtype=float), Z=np.array(Z, dtype=float),
            L=stack("L"), nabla=stack("nabla"), convective=stack("convective"), v_conv=stack("v_conv"),
            u=stack("u"), X_profile=stack("X"), scalars=scalars,
        )


class SolvedRelation:
    """Radius and luminosity of the solved zero-age main-sequence star."""

    name = "solved"
    description = ("R and L of the main-sequence star solved from the structure equations with the chosen "
                   "opacity law, at its age")
    params = _params()
    validity = _VALIDITY

    def predict(self, M, X, Z, opacity, alpha_mlt=ALPHA_DEFAULT, age=0.0):
        """Photospheric radius (cm) and luminosity (erg/s) [n] of the solved stars of mass M (g)."""
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        stars = solved_stars(M, _flat(X, M.size), _flat(Z, M.size), opacity, alpha_mlt=alpha_mlt, age=age)
        return np.array([s.R for s in stars]), np.array([s.L_surface for s in stars])


@hookimpl
def radwalk_profiles():
    return [SolvedProfile()]


@hookimpl
def radwalk_relations():
    return [SolvedRelation()]
