"""Built-in likelihoods: Gaussian with a systematic floor, and Student-t.

Both compare predicted radius, luminosity and effective temperature with the
measured ones.  The error of each observable is the measurement error and a
fractional systematic floor added in quadrature, sigma^2 = err^2 + (f x)^2:
the floor stands for what the relation itself gets wrong (age spread on the
main sequence, the model's own simplifications), so that a tiny measurement
error cannot make the posterior narrower than the model is good.
Observables that were not measured (NaN) are skipped.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import gammaln

from radwalk.host.components import OBSERVABLES, Observations
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity

_FLOOR_DEFAULTS = {"radius": 0.03, "luminosity": 0.05, "teff": 0.01}


def _floor_params():
    return tuple(
        Param(
            f"floor_{k}", "", 0.0, 1.0, v,
            f"fractional systematic floor on {k} added in quadrature to its error",
        )
        for k, v in _FLOOR_DEFAULTS.items()
    )


def _residuals(predicted: dict, observed: Observations, params: dict):
    """Yields (z, log sigma) per measured observable, shaped like the predictions."""
    for key in OBSERVABLES:
        value = observed.values.get(key, np.nan)
        if not np.isfinite(value):
            continue
        err = observed.errors[key]
        floor = params.get(f"floor_{key}", _FLOOR_DEFAULTS[key])
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
    name = "gaussian"
    description = "independent Gaussian errors with a fractional systematic floor per observable"
    params = _floor_params()
    validity = Validity(note="errors assumed Gaussian and independent")

    def loglike(self, predicted, observed, **params):
        ll = np.zeros(np.shape(predicted["radius"]))
        for z, log_sigma in _residuals(predicted, observed, params):
            ll -= 0.5 * z * z + log_sigma
        return _clean(ll)


class StudentT:
    name = "student-t"
    description = "Student-t errors (heavy tails for outliers) with a fractional systematic floor"
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
