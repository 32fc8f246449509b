"""Built-in likelihoods: Gaussian and Student-t, each with a model-error term per observable.

Both compare the predicted radius, luminosity and effective temperature with
the measured ones.  The error of each observable is the measurement error and
the model's own error added in quadrature,

    sigma^2 = err^2 + (f x)^2,

with ``x`` the measured value and ``f`` the model's fractional error for that
observable (parameters ``floor_radius``, ``floor_luminosity``,
``floor_teff``).  These floors ARE the model-systematics term; there is no
second one.  They say how far the model star itself lands from real stars of
the same mass, composition and age, so that a tiny measurement error (an
eclipsing binary's 1 % radius) cannot make the posterior narrower than the
model is good.  Their sizes, :data:`MODEL_ERROR`, are derived below in
:data:`MODEL_CHECKS` and :data:`INTERPOLATION_CHECKS` from the solved model's
measured misses against published checks; docs/likelihood.md explains the
derivation.  They are fixed settings of a run (``[settings]``,
``--set floor_luminosity=0.3``), never sampled: one star cannot tell how wrong
the model is, a sampled floor would only trade off against the star's own
parameters.  The fractional form uses the measured value, not the predicted
one, so the normalisation does not depend on the parameters.

Observables that were not measured (NaN) are skipped.  R, L and T_eff are
taken as independent.  A catalog whose L was computed from its own R and
T_eff (L = 4 pi R^2 sigma T_eff^4) says so in its ``luminosity_derived``
column; such a star reaches the likelihood without L
(:meth:`radwalk.inference.star.Star.observations`), since that L repeats the
information of R and T_eff and would count it twice.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import gammaln

from radwalk.host.components import OBSERVABLES, Observations
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity

LN10 = math.log(10.0)

# ---------------------------------------------------------------------------- the model's error budget
# Everything the default sizes are computed from is in these two tables; when the model changes (the
# opacity mended, a new grid), update the rows and the sizes follow (docs/likelihood.md shows them).

MODEL_CHECKS = (
    # (M / M_sun, model L / L_sun, model R / R_sun, published L, published R): the solved zero-age star at
    # X = 0.70, Z = 0.02 (alpha 1.8, default opacity) against the zero-age main-sequence fits of Tout, Pols,
    # Eggleton & Han (1996, MNRAS 281, 257; coefficients from memory), as tabulated in docs/physics.md.
    # Only the masses inside the default track grid (0.6-8 M_sun) count.
    (0.8, 0.157, 0.664, 0.236, 0.729),
    (1.0, 0.476, 0.800, 0.698, 0.888),
    (1.2, 1.22, 0.977, 1.67, 1.140),
    (1.5, 3.93, 1.333, 4.63, 1.437),
    (2.0, 15.0, 1.542, 15.9, 1.610),
    (3.0, 81.0, 1.909, 80.0, 1.979),
    (5.0, 568.0, 2.562, 530.0, 2.636),
)
"""Rows (mass, model L, model R, published L, published R) of the physics checks."""

INTERPOLATION_CHECKS = {
    # Largest leave-one-mass-out errors of a track grid of 8 masses 0.8-5 M_sun x 3 Z, at 1.04 M_sun where the
    # convective core appears (tests/forward/test_model_grid.py, measured): log L 0.077 dex, log T_eff
    # 0.026 dex, R 13 % (written here as 0.053 dex).  Leaving a node out doubles the spacing and an error
    # at a kink grows in proportion to the spacing, so half of these is the grid's own error; the default
    # grid's nodes near 1 M_sun are closer still, so this is an upper estimate.
    "luminosity": 0.077 / 2,
    "teff": 0.026 / 2,
    "radius": math.log10(1.13) / 2,
}
"""Interpolation error of the track grid per observable, dex."""


def physics_misses() -> dict:
    """Misses of the model against :data:`MODEL_CHECKS`, dex, per observable, ndarray [n_checks].

    T_eff's miss follows from those of L and R through L = 4 pi R^2 sigma T_eff^4.
    """
    rows = np.array(MODEL_CHECKS, dtype=float)
    dlogl = np.log10(rows[:, 1] / rows[:, 3])
    dlogr = np.log10(rows[:, 2] / rows[:, 4])
    return {"radius": dlogr, "luminosity": dlogl, "teff": (dlogl - 2.0 * dlogr) / 4.0}


def model_error_dex() -> dict:
    """The model's error per observable, dex: rms physics miss and interpolation error in quadrature."""
    misses = physics_misses()
    return {key: math.hypot(float(np.sqrt(np.mean(misses[key] ** 2))), INTERPOLATION_CHECKS[key])
            for key in OBSERVABLES}


MODEL_ERROR = {key: round(LN10 * v, 3) for key, v in model_error_dex().items()}
"""Default fractional model error per observable (ln 10 x dex, the first-order fraction of a dex)."""


def _floor_params():
    return tuple(
        Param(
            f"floor_{key}", "", 0.0, 1.0, MODEL_ERROR[key],
            f"model error of {key} as a fraction of its measured value, added in quadrature to its error "
            f"(default {MODEL_ERROR[key]:g} from the model's misses, docs/likelihood.md); a fixed setting",
        )
        for key in OBSERVABLES
    )


FLOOR_NAMES = tuple(f"floor_{key}" for key in OBSERVABLES)


def _residuals(predicted: dict, observed: Observations, params: dict):
    """Yields (z, log sigma) per measured observable, shaped like the predictions."""
    for key in OBSERVABLES:
        value = observed.values.get(key, np.nan)
        if not np.isfinite(value):
            continue
        err = observed.errors[key]
        floor = params.get(f"floor_{key}", MODEL_ERROR[key])
        if np.ndim(floor) == 0:  # the usual case, a fixed floor: scalar arithmetic, off the array path
            sigma = math.sqrt(err**2 + (float(floor) * value) ** 2)
            yield (predicted[key] - value) * (1.0 / sigma), math.log(sigma)
        else:
            sigma = np.sqrt(err**2 + (np.asarray(floor) * value) ** 2)
            yield (predicted[key] - value) / sigma, np.log(sigma)


def _clean(ll):
    """-inf where the log-likelihood is not finite (a relation that found no star gives NaN); never NaN."""
    return np.where(np.isfinite(ll), ll, -np.inf)


class Gaussian:
    """Independent Gaussian errors: measurement and model error in quadrature per observable.

    Its parameters ``floor_radius``, ``floor_luminosity`` and ``floor_teff``
    are the model's fractional errors (:data:`MODEL_ERROR` by default), fixed
    settings of a run (:attr:`fixed_params`: a prior on them is refused).
    """

    name = "gaussian"
    fused_model = "gaussian"  # this loglike is what radwalk.inference.fused compiles (tests/inference/test_fused.py)
    description = "independent Gaussian errors; measurement and model error in quadrature per observable"
    fixed_params = FLOOR_NAMES
    params = _floor_params()
    validity = Validity(note="errors assumed Gaussian and independent")

    def loglike(self, predicted, observed, **params):
        ll = np.zeros(np.shape(predicted["radius"]))
        for z, log_sigma in _residuals(predicted, observed, params):
            ll -= 0.5 * z * z + log_sigma
        return _clean(ll)


class StudentT:
    """Student-t errors of scale sigma (measurement and model error in quadrature), heavy-tailed for outliers."""

    name = "student-t"
    description = "Student-t errors (heavy tails for outliers); measurement and model error in quadrature"
    fixed_params = FLOOR_NAMES
    params = _floor_params() + (
        Param("nu", "", 1.0, 100.0, 4.0, "degrees of freedom of the Student-t (small: heavier tails)"),
    )
    validity = Validity(note="robust to occasional gross errors in one observable")

    def loglike(self, predicted, observed, **params):
        nu = np.asarray(params.get("nu", 4.0), dtype=float)
        n = np.shape(predicted["radius"])
        ll = np.zeros(n)
        norm = gammaln((nu + 1) / 2) - gammaln(nu / 2) - 0.5 * np.log(nu * np.pi)
        for z, log_sigma in _residuals(predicted, observed, params):
            ll = ll + norm - log_sigma - 0.5 * (nu + 1) * np.log1p(z**2 / nu)
        return _clean(ll)


@hookimpl
def radwalk_likelihoods():
    return [Gaussian(), StudentT()]
