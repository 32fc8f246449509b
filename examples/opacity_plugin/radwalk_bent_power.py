"""The ``bent-power`` opacity law for radwalk: a power law whose temperature slope bends.

An invented law, written as the worked example of the radwalk plugin guide
(docs/plugins.md); it is not fitted to any opacity data.  It reads

    kappa = kappa_bend (1 + X) (rho / 1 g cm^-3)^rho_slope (T / T_bend)^-cool_slope
            * [(1 + (T / T_bend)^w) / 2]^((cool_slope - hot_slope) / w),   w = 2

so that well below ``T_bend`` kappa falls as T^-cool_slope, well above it as
T^-hot_slope, and at T = T_bend, rho = 1 g/cm^3 it is exactly
kappa_bend (1 + X).  The factor 1 + X counts free electrons per unit mass, as
in every opacity of an ionised gas.  There is no electron-scattering floor,
so in hot, thin gas the law falls below Thomson scattering, which no real
opacity does; add ``radwalk.plugins.opacity.thomson(X)`` for anything but a demonstration.

Install this folder (``pip install ./examples/opacity_plugin``) and radwalk
finds the law through the ``radwalk.plugins`` entry point in pyproject.toml;
or give this file directly: ``radwalk fit --plugin radwalk_bent_power.py``.
"""

from __future__ import annotations

import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Prior, Validity

# How sharp the bend is: the slope changes over about a factor 10^(1/w) in T
# either side of T_bend.  Fixed, not a parameter: a sharper bend buys nothing
# in a fit and w = 2 keeps neighbouring values smooth.
BEND_SHARPNESS = 2.0

# Surface points may carry rho = 0 or T = 0; clipping T at 1 K keeps inf out of
# T^-cool_slope there (the law is only meant for T >= 1e4 K).
T_FLOOR = 1.0  # K


class BentPower:
    """A power law in density and temperature whose temperature slope bends at T_bend."""

    name = "bent-power"
    description = "invented example: power law in rho and T, T slope bending from cool_slope to hot_slope"
    validity = Validity(
        T=(1e4, 1e8),
        rho=(1e-10, 1e3),
        note="an invented law for the plugin guide, meant for ionised stellar interiors",
    )

    # Every parameter: name, unit, lower and upper bound, default, one-line description.  None is
    # sampled by default (sampled=False): a fit holds them at their defaults unless told otherwise.
    params = (
        Param("kappa_bend", "cm^2/g", 0.01, 1e4, 20.0,
              "opacity at T = T_bend and rho = 1 g/cm^3, per unit (1 + X)",
              prior=Prior("log-uniform", 1.0, 1000.0), latex=r"$\kappa_{\rm bend}$"),
        Param("T_bend", "K", 1e4, 1e8, 2e6, "temperature of the bend between the two slopes",
              prior=Prior("log-uniform", 1e5, 1e7), latex=r"$T_{\rm bend}$"),
        # not below 0: a negative power would make kappa infinite where rho = 0
        Param("rho_slope", "", 0.0, 2.0, 0.5, "kappa ~ rho^rho_slope", latex=r"$a$"),
        Param("cool_slope", "", 0.0, 6.0, 3.5, "kappa ~ T^-cool_slope well below T_bend",
              latex=r"$b_{\rm cool}$"),
        Param("hot_slope", "", 0.0, 6.0, 1.5, "kappa ~ T^-hot_slope well above T_bend",
              latex=r"$b_{\rm hot}$"),
    )

    def kappa(self, rho, T, X, Z, kappa_bend=20.0, T_bend=2e6, rho_slope=0.5, cool_slope=3.5,
              hot_slope=1.5):
        """Rosseland-mean opacity of the bent power law.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
            Hydrogen and metal mass fractions (Z is not used).
        kappa_bend : array_like, cm^2/g
        T_bend : array_like, K
        rho_slope, cool_slope, hot_slope : array_like, dimensionless
            All broadcast against each other, e.g. rho, T [n, g] with X, Z
            and the parameters [n, 1], or all [n], or scalars.

        Returns
        -------
        ndarray, cm^2/g
            The broadcast shape of all inputs; finite and positive for
            rho > 0.
        """
        rho = np.maximum(np.asarray(rho, dtype=float), 0.0)
        T = np.maximum(np.asarray(T, dtype=float), T_FLOOR)
        X, Z = np.asarray(X, dtype=float), np.asarray(Z, dtype=float)
        cool, hot = np.asarray(cool_slope, dtype=float), np.asarray(hot_slope, dtype=float)
        t = T / T_bend
        w = BEND_SHARPNESS
        bend = ((1.0 + t**w) / 2.0) ** ((cool - hot) / w)
        kappa = kappa_bend * (1.0 + X) * rho**rho_slope * t**-cool * bend
        # Z does not enter the formula, but the result must still have the shape of all inputs.
        return kappa * np.ones_like(Z)


@hookimpl
def radwalk_opacities():
    """The opacity laws of this plugin (one)."""
    return [BentPower()]
