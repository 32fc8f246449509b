"""Built-in opacity components: electron scattering, Kramers, H-minus and the default (combined) law.

Thin adapters: the formulas, their sources and the default law's microphysics are in
:mod:`radwalk.physics.opacity`.  Every law returns a Rosseland-mean opacity in cm^2/g and broadcasts over
all of its inputs: the host passes rho and T of shape ``[n, ngrid]`` with X, Z and the law's parameters of
shape ``[n, 1]``, or everything ``[n]``, or scalars.
"""

from __future__ import annotations

import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity
from radwalk.physics.opacity import (  # noqa: F401  (re-exported for plugin authors and tests)
    _full,
    default_law_terms,
    h_minus,
    hot_scattering_factor,
    kramers_bound_free,
    kramers_free_free,
    stellar_density,
    thomson,
)


def _kramers_params() -> tuple[Param, ...]:
    # A fresh tuple per component: the registry records each Param's owner.
    return (
        Param("g_bf", "", 0.1, 10.0, 1.0, "bound-free Gaunt factor of the Kramers law",
              latex=r"$g_{\rm bf}$"),
        Param("g_ff", "", 0.1, 10.0, 1.0, "free-free Gaunt factor of the Kramers law",
              latex=r"$g_{\rm ff}$"),
        Param("guillotine", "", 0.0, 100.0, 0.0,
              "bound-free guillotine factor t; below 1 (default 0) uses the density fit "
              "t = 2.82 (rho (1+X))^0.2, rho in g/cm^3 (Novotny 1973)",
              latex=r"$t$"),
    )


class ElectronScattering:
    """Thomson scattering on free electrons, optionally corrected when hot or dense."""

    name = "electron-scattering"
    description = "Thomson electron scattering sigma_T / (mu_e m_u), fully ionised gas"
    validity = Validity(
        T=(1e5, 1e8),
        rho=(0.0, 1e3),
        note=(
            "fully ionised gas; the whole opacity only where absorption is weaker (hot, tenuous "
            "gas); without hot_correction it is too high by (T/4.5e8)^0.86 (27% at 1e8 K) and by "
            "2.7e11 rho/T^2 when dense (17% at the solar centre)"
        ),
    )

    def __init__(self):
        self.params = (
            Param("hot_correction", "", 0.0, 1.0, 0.0,
                  "1 applies the degeneracy and Klein-Nishina correction (Paczynski 1983), 0 pure "
                  "Thomson; values between blend linearly", latex=r"$f_{\rm hot}$"),
        )

    def kappa(self, rho, T, X, Z, hot_correction=0.0):
        """Electron-scattering opacity.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        hot_correction : array_like, dimensionless
            0 for pure Thomson scattering, 1 for the corrected fit.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        h = np.asarray(hot_correction, dtype=float)
        base = thomson(X)
        if np.all(h == 0):
            return _full(base, rho, T, X, Z, h)
        factor = hot_scattering_factor(rho, T)
        return _full(base * (1.0 - h + h * factor), rho, T, X, Z, h)


class Kramers:
    """Kramers bound-free plus free-free absorption (no electron scattering)."""

    name = "kramers"
    description = "Kramers bound-free + free-free absorption with Gaunt and guillotine factors"
    validity = Validity(
        T=(1e4, 1e8),
        rho=(1e-10, 1e3),
        Z=(0.0, 0.1),
        note=(
            "below 1e4 K hydrogen recombines and free electrons run out; above 1e8 K the metals "
            "are fully ionised and bound-free absorption ends; at high density electron "
            "degeneracy is ignored; no electron scattering is included"
        ),
    )

    def __init__(self):
        self.params = _kramers_params()

    def kappa(self, rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
        """Kramers opacity, bound-free + free-free.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        g_bf, g_ff : array_like, dimensionless
            Gaunt factors.
        guillotine : array_like, dimensionless
            Fixed t >= 1, or below 1 for the density fit.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        k = kramers_bound_free(rho, T, X, Z, g_bf, guillotine) + kramers_free_free(rho, T, X, Z, g_ff)
        return _full(k, rho, T, X, Z, g_bf, g_ff, guillotine)


class HMinus:
    """Absorption by the negative hydrogen ion in cool envelopes."""

    name = "h-minus"
    description = "H-minus absorption of cool envelopes, 2.5e-31 (Z/0.02) rho^0.5 T^9"
    validity = Validity(
        T=(3e3, 6e3),
        rho=(1e-10, 1e-5),
        Z=(0.001, 0.03),
        note="cool envelopes and atmospheres, Carroll & Ostlie 1996 eq. 9.28",
    )

    def __init__(self):
        self.params = ()

    def kappa(self, rho, T, X, Z):
        """H-minus opacity.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
            X is not used.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs.
        """
        return _full(h_minus(rho, T, Z), rho, T, X, Z)


class Combined:
    """Default law: Saha-ionised H-He-metal mixture with hydrogenic, H-minus and metal absorption.

    kappa = kappa_es + kappa_H + kappa_He + kappa_H- + kappa_Ray + kappa_Z + kappa_mol, a plain
    sum of the terms' Rosseland means (common practice, e.g. Kippenhahn, Weigert & Weiss 2012,
    ch. 17; the Rosseland mean of a sum is at least the sum of the means, so this is a
    lower bound where the terms' windows overlap).  Every term carries its own
    ionisation fractions, so no term needs switching off by hand and the sum is smooth
    (no kinks: the solver differentiates it numerically).  See :func:`default_law_terms`:

    * electron scattering sigma_T n_e / rho on the Saha electrons, with the
      Paczynski (1983) degeneracy and Klein-Nishina factor (fit to Buchler & Yueh 1976);
    * hydrogen and helium bound-free + free-free: hydrogenic Kramers cross-sections with
      Saha-Boltzmann level populations summed over n = 1..400 and Rosseland-averaged at
      each temperature (exact for that model; no lines);
    * H-minus from its Saha equation and a published cross-section, and Rayleigh
      scattering by neutral hydrogen;
    * metals: Kramers' bound-free form with our guillotine and line factors, calibrated to
      standard-solar-model opacities at the centre and at the base of the convection zone;
    * a molecular floor 0.1 Z in cool gas.

    Beyond log R = log rho - 3 log(T/1e6 K) = 2, where no star is, the density saturates
    smoothly (:func:`stellar_density`).

    Not included: bound-bound (line) absorption of H and He, the iron "Z bump" near
    2e5 K, molecules beyond the floor, electron conduction (it matters above ~1e4 g/cm^3).
    """

    name = "combined"
    description = ("Saha-ionised mixture: electron scattering + hydrogenic H/He + H-minus + "
                   "calibrated metal absorption, 4e3-1e8 K")
    validity = Validity(
        T=(4e3, 1e8),
        rho=(1e-12, 1e3),
        Z=(0.0, 0.05),
        note=(
            "stellar envelopes and interiors, log R = log rho - 3 log(T/1e6 K) <= 1 (cooler and "
            "denser gas is not modelled: no degeneracy beyond electron scattering's, no "
            "conduction, and beyond log R = 2 the density is held there); calibrated at two points "
            "of the standard solar model (centre, base of the convection zone), its shape between "
            "them our own; 0.5-2.5 times Bell & Lin (1994) in the hydrogen ionisation zone at "
            "1e-10-1e-7 g/cm^3, but 3-10x low at the peak (1.2-2e4 K) above 1e-6 g/cm^3 (no line "
            "absorption); the iron bump near 2e5 K is absent; below 4000 K molecules are only a floor"
        ),
    )

    def __init__(self):
        self.params = (
            Param("g_bf", "", 0.1, 10.0, 1.0,
                  "multiplies the metal absorption term (1 = calibrated to the standard solar model)",
                  latex=r"$g_{\rm bf}$"),
            Param("g_ff", "", 0.1, 10.0, 1.0,
                  "Gaunt factor of the hydrogen and helium bound-free and free-free absorption",
                  latex=r"$g_{\rm ff}$"),
            Param("guillotine", "", 0.0, 100.0, 0.0,
                  "metal guillotine factor t; below 1 (default 0) uses the fit "
                  "t = sqrt(1 + 8.75 rho (1+X)), rho in g/cm^3",
                  latex=r"$t$"),
        )

    def kappa(self, rho, T, X, Z, g_bf=1.0, g_ff=1.0, guillotine=0.0):
        """Default opacity: the sum of :func:`default_law_terms`.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like, dimensionless
        g_bf : array_like, dimensionless
            Multiplier of the metal term.
        g_ff : array_like, dimensionless
            Gaunt factor of the hydrogen and helium absorption.
        guillotine : array_like, dimensionless
            Fixed metal guillotine factor >= 1, or below 1 for the default.

        Returns
        -------
        ndarray, cm^2/g
            Broadcast shape of all inputs; positive wherever rho > 0 (tested on
            1e3-1e9 K and 1e-14-1e6 g/cm^3, X from 0 to 1, Z from 0 to 0.05).
        """
        k = sum(default_law_terms(rho, T, X, Z, g_bf, g_ff, guillotine))
        return _full(k, rho, T, X, Z, g_bf, g_ff, guillotine)


@hookimpl
def radwalk_opacities():
    return [ElectronScattering(), Kramers(), HMinus(), Combined()]
