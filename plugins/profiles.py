"""Built-in profile models: a polytrope of free index and Eddington's standard model.

Both are thin wrappers around :func:`radwalk.physics.polytrope.polytrope_structure`;
the physics lives in :mod:`radwalk.physics.lane_emden` and :mod:`radwalk.physics.polytrope`.
"""

from __future__ import annotations

import numpy as np

from radwalk.errors import ConfigError
from radwalk.host.components import Profile
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Prior, Validity
from radwalk.physics.composition import mu as mean_molecular_weight
from radwalk.physics.polytrope import eddington_beta, polytrope_structure


def _one_per_sample(a) -> np.ndarray:
    # Inputs may arrive as [k] or already lifted to [k, 1]; both mean one value per sample.
    a = np.asarray(a, dtype=float)
    return a.reshape(-1) if a.ndim > 1 else a


class Polytrope:
    """P = K rho^(1 + 1/n) through the whole star, with gas + radiation temperatures."""

    name = "polytrope"
    description = "polytrope of free index n scaled to M and R; T from ideal gas plus radiation"
    params = (
        Param(
            name="n",
            unit="",
            lower=0.0,
            upper=4.99,
            default=3.0,
            description="polytropic index",
            # 1.5 is a fully convective star (ideal monatomic gas, adiabatic),
            # 3 Eddington's radiative star; 3.5 leaves room for more central
            # concentration.
            prior=Prior("uniform", 1.5, 3.5),
            sampled=True,
            latex=r"$n$",
        ),
    )
    validity = Validity(
        note="a single polytrope is a crude model of a real star: one index for the whole interior, "
        "no separate convective and radiative zones; no limits beyond 0 <= n <= 4.99",
    )

    def profile(self, M, R, X, Z, n=3.0) -> Profile:
        """Structure of stars of mass M and radius R.

        Parameters
        ----------
        M : array_like [k], g
        R : array_like [k], cm
        X, Z : array_like [k]
        n : float or array_like [k]
            Polytropic index, within the declared bounds.

        Returns
        -------
        Profile
            Arrays [k, g] on :data:`radwalk.physics.lane_emden.GRID`.
        """
        p = self.params[0]
        a = np.asarray(n, dtype=float)
        bad = ~np.isfinite(a) | (a < p.lower) | (a > p.upper)
        if bad.any():
            raise ConfigError(
                f"polytrope index n = {a[bad].flat[0]} is outside its allowed range "
                f"[{p.lower:g}, {p.upper:g}]"
            )
        return polytrope_structure(a, M, R, X, Z)


class EddingtonStandard:
    """n = 3 with the gas-pressure fraction beta constant, fixed by M and mu."""

    name = "eddington-standard"
    description = "Eddington's standard model: n = 3 polytrope with constant gas/total pressure beta(M, mu)"
    params = ()
    validity = Validity(
        mass=(0.5, 100.0),
        note="radiative main-sequence stars; fully convective low-mass stars and giants are not "
        "n = 3 polytropes, and constant beta is an assumption",
    )

    def profile(self, M, R, X, Z) -> Profile:
        """Structure of stars of mass M and radius R.

        Parameters
        ----------
        M : array_like [k], g
        R : array_like [k], cm
        X, Z : array_like [k]

        Returns
        -------
        Profile
            Arrays [k, g]; ``beta`` is the same at every point of a star.

        The host reports masses outside ``validity`` (one place for every
        component, see StageSet.validity_messages).
        """
        M_arr = _one_per_sample(M)
        X, Z = _one_per_sample(X), _one_per_sample(Z)
        beta = eddington_beta(M_arr, mean_molecular_weight(X, Z))
        return polytrope_structure(3.0, M_arr, R, X, Z, beta=beta)


@hookimpl
def radwalk_profiles():
    return [Polytrope(), EddingtonStandard()]
