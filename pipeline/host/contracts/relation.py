"""The relation contract: ``predict(M, X, Z, opacity, **params) -> (R, L)`` for three masses.

The opacity is the default law of the opacity stage (the first registered
one if that is missing) with its default parameters.
"""

from __future__ import annotations

import numpy as np

from radwalk import constants as k
from radwalk.host.contracts.inputs import compositions, default_opacity, default_params, fmt_point, masses
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Check, Subject, broadcasting_row, inputs_row, loop_mismatch, warnings_row
from radwalk.host.contracts.support import declares_support, support_row

STAGE = "relation"


class _Stars:
    """The stars of the check: M, X, Z and parameters [n], and the opacity law they use."""

    def __init__(self, comp, registry):
        self.opacity = default_opacity(registry)
        validity = getattr(comp, "validity", None)
        self.masses = masses(validity)
        self.n = self.masses.size
        self.M = self.masses * k.M_SUN
        comps = compositions(validity)
        self.X, self.Z = comps[:, 0], comps[:, 1]
        self.params = default_params(comp, (self.n,))
        self._predict = comp.predict

    def label(self, i) -> str:
        return fmt_point(mass=self.masses[i], X=self.X[i], Z=self.Z[i])

    def call(self, M, X, Z, *values):
        return self._predict(M, X, Z, self.opacity, **dict(zip(self.params, values)))

    def args(self, s=slice(None)):
        return (self.M[s], self.X[s], self.Z[s], *(v[s] for v in self.params.values()))


def _stars(s: Subject) -> _Stars:
    return s.memo("relation.stars", lambda: _Stars(s.component, s.registry))


def _call(s: Subject):
    return s.memo("relation.call", lambda: s.call(_stars(s).call, *_stars(s).args()))


def _pair(s: Subject):
    """(R, L) as float arrays, or why the result is not such a pair (text); None if the call failed."""
    def convert():
        if s.component is None or not _call(s)[0]:
            return None
        res = _call(s)[1]
        try:
            Rp, Lp = (np.asarray(v, dtype=float) for v in res)
        except (TypeError, ValueError):
            return f"returned {type(res).__name__}, not a pair (R, L)"
        return Rp, Lp

    return s.memo("relation.pair", convert)


def _shaped(s: Subject) -> bool:
    pair = _pair(s)
    if not isinstance(pair, tuple):
        return False
    n = _stars(s).n
    return pair[0].shape == (n,) and pair[1].shape == (n,)


def _loop(s: Subject) -> str | None:
    def outputs(r):
        return {"R": np.asarray(r[0], dtype=float), "L": np.asarray(r[1], dtype=float)}

    st = _stars(s)
    return s.memo("relation.loop", lambda: loop_mismatch(s, st.call, st.n, st.args, outputs, st.label, _call(s)[1]))


def check_relation_call(subject) -> CheckRow | None:
    """``predict`` runs with the default opacity law for masses over the stated range."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    ok, res = _call(s)
    st = _stars(s)
    mass_text = ", ".join(f"{m:.3g}" for m in st.masses)
    return CheckRow("call", ok, f"predict with the {st.opacity.law.name!r} opacity for masses {mass_text} M_sun"
                    if ok else f"raised {res}")


def check_relation_shape(subject) -> CheckRow | None:
    """``predict`` returns a pair (R, L) of [n] arrays."""
    s = Subject.of(subject)
    pair = _pair(s)
    if pair is None:
        return None
    if isinstance(pair, str):
        return CheckRow("shape", False, pair)
    n = _stars(s).n
    if _shaped(s):
        return CheckRow("shape", True, f"R and L [{n}]")
    return CheckRow("shape", False, f"R shape {list(pair[0].shape)}, L shape {list(pair[1].shape)}; "
                                    f"expected [{n}] each")


def check_relation_finite(subject) -> CheckRow | None:
    """R and L are finite and positive."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    Rp, Lp = _pair(s)
    bad = ~(np.isfinite(Rp) & np.isfinite(Lp) & (Rp > 0) & (Lp > 0))
    i = int(np.argmax(bad))
    return CheckRow("finite", not bad.any(), f"R={Rp[i]:.6g} cm, L={Lp[i]:.6g} erg/s for {_stars(s).label(i)}"
                    if bad.any() else "R and L finite and positive")


def check_relation_broadcasting(subject) -> CheckRow | None:
    """Each star computed alone has the R and L it has in the n-star call."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    return broadcasting_row(_loop(s), _stars(s).n)


def check_relation_warnings(subject) -> CheckRow | None:
    """No warning is emitted for stars inside the stated range."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    _loop(s)
    return warnings_row(s, "inside the validity range")


def check_relation_support(subject) -> CheckRow | None:
    """A declared ``support`` returns bool [n], holds at the default parameters and agrees one star at a time."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return support_row(s, _stars(s))


# in report order
def check_relation_inputs(subject) -> CheckRow | None:
    """``predict`` leaves M, X, Z and the parameters as it was given them (no writes into its inputs)."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return inputs_row(s, _call, _stars(s), _Stars(s.component, s.registry),
                      {"M": "M", "X": "X", "Z": "Z", "params": "params"})


CHECKS = (
    Check("call", check_relation_call),
    Check("shape", check_relation_shape),
    Check("finite", check_relation_finite),
    Check("broadcasting", check_relation_broadcasting),
    Check("warnings", check_relation_warnings),
    Check("support", check_relation_support, applies=declares_support),
    Check("inputs", check_relation_inputs),
)
