"""The likelihood contract: ``loglike(predicted, observed, **params) -> [n]`` around the observed Sun.

Three predictions -- the observation itself, 1.1 times it and 0.5 times it
in radius, luminosity and T_eff -- must give log-likelihoods that are never
NaN and fall in that order.
"""

from __future__ import annotations

import numpy as np

from radwalk import constants as k
from radwalk.host.components import Observations
from radwalk.host.contracts.inputs import default_params
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Check, Subject, broadcasting_row, inputs_row, loop_mismatch, warnings_row

STAGE = "likelihood"
# The Sun with errors of the size a good measurement of another star has: 1 % in R, 2 % in L, 50 K
# in T_eff (common practice, no source).
OBSERVED = Observations(values={"radius": k.R_SUN, "luminosity": k.L_SUN, "teff": k.TEFF_SUN},
                        errors={"radius": 0.01 * k.R_SUN, "luminosity": 0.02 * k.L_SUN, "teff": 50.0})
SCALES = np.array([1.0, 1.1, 0.5])  # the observation itself, near it, far from it


class _Predictions:
    """The predictions of the check and the component's parameters [n]."""

    def __init__(self, comp):
        self.n = SCALES.size
        self.predicted = {"radius": k.R_SUN * SCALES, "luminosity": k.L_SUN * SCALES,
                          "teff": k.TEFF_SUN * SCALES}
        self.params = default_params(comp, (self.n,))
        self._loglike = comp.loglike

    def call(self, s):
        return self._loglike({key: v[s] for key, v in self.predicted.items()}, OBSERVED,
                             **{name: v[s] for name, v in self.params.items()})

    @staticmethod
    def label(i) -> str:
        return f"prediction {SCALES[i]:g}x the observation"


def _predictions(s: Subject) -> _Predictions:
    return s.memo("likelihood.predictions", lambda: _Predictions(s.component))


def _call(s: Subject):
    return s.memo("likelihood.call", lambda: s.call(_predictions(s).call, slice(None)))


def _values(s: Subject):
    """The log-likelihoods as floats, None if the call failed."""
    if s.component is None or not _call(s)[0]:
        return None
    return s.memo("likelihood.values", lambda: np.asarray(_call(s)[1], dtype=float))


def _shaped(s: Subject) -> bool:
    ll = _values(s)
    return ll is not None and ll.shape == (SCALES.size,)


def _loop(s: Subject) -> str | None:
    p = _predictions(s)
    return s.memo("likelihood.loop", lambda: loop_mismatch(
        s, p.call, p.n, lambda sl: (sl,), lambda r: {"loglike": np.asarray(r, dtype=float)}, p.label, _call(s)[1]))


def check_likelihood_call(subject) -> CheckRow | None:
    """``loglike`` runs for predictions at the observed Sun, 1.1x and 0.5x it."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    ok, ll = _call(s)
    return CheckRow("call", ok, "loglike at the observed Sun, 1.1x and 0.5x it" if ok else f"raised {ll}")


def check_likelihood_shape(subject) -> CheckRow | None:
    """``loglike`` returns [n] values."""
    s = Subject.of(subject)
    ll = _values(s)
    if ll is None:
        return None
    n = SCALES.size
    return CheckRow("shape", _shaped(s), f"[{n}]" if _shaped(s) else
                    f"returned shape {list(ll.shape)}; expected [{n}]")


def check_likelihood_values(subject) -> CheckRow | None:
    """Never NaN, finite at the observation, and highest there: falling from 1x to 1.1x to 0.5x."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    ll = _values(s)
    problems = []
    if np.isnan(ll).any():
        problems.append(f"NaN for predictions {SCALES[np.isnan(ll)][0]:g}x the observation")
    elif not np.isfinite(ll[0]):
        problems.append(f"{ll[0]} at the observation itself")
    elif not (ll[0] > ll[1] > ll[2]):
        values = ", ".join(f"{v:.6g}" for v in ll)
        problems.append(f"not highest at the observation: {values} for 1, 1.1, 0.5x")
    return CheckRow("values", not problems, problems[0] if problems else
                    f"never NaN, highest at the observation ({', '.join(f'{v:.4g}' for v in ll)})")


def check_likelihood_broadcasting(subject) -> CheckRow | None:
    """Each prediction alone has the log-likelihood it has in the n-prediction call."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    return broadcasting_row(_loop(s), SCALES.size)


def check_likelihood_warnings(subject) -> CheckRow | None:
    """No warning is emitted."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    _loop(s)
    return warnings_row(s, "")


# in report order
def check_likelihood_inputs(subject) -> CheckRow | None:
    """``loglike`` leaves the predictions and the parameters as it was given them (no writes into its inputs)."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return inputs_row(s, _call, _predictions(s), _Predictions(s.component),
                      {"predicted": "predicted", "params": "params"})


CHECKS = (
    Check("call", check_likelihood_call),
    Check("shape", check_likelihood_shape),
    Check("values", check_likelihood_values),
    Check("broadcasting", check_likelihood_broadcasting),
    Check("warnings", check_likelihood_warnings),
    Check("inputs", check_likelihood_inputs),
)
