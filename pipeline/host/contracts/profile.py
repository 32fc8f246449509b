"""The profile contract: ``profile(M, R, X, Z, **params) -> Profile`` for three masses over the stated range.

The stars are main-sequence-like, R = R_sun (M / M_sun)^0.8, at the three
compositions of :func:`radwalk.host.contracts.inputs.compositions`.  A
profile model whose ``profile`` takes an ``opacity`` argument (one that
solves the structure itself) gets the opacity stage's default law, as in a run.
"""

from __future__ import annotations

import inspect

import numpy as np

from radwalk import constants as k
from radwalk.host.components import Profile
from radwalk.host.contracts.inputs import compositions, default_opacity, default_params, fmt_point, masses
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Check, Subject, broadcasting_row, inputs_row, loop_mismatch, warnings_row
from radwalk.host.contracts.support import declares_support, support_row

STAGE = "profile"
FIELDS = ("r", "m", "rho", "P", "T", "beta")
SURFACE_RTOL = 1e-3  # r and m at the last grid point must be R and M to this


class _Stars:
    """The stars of the check: M, R, X, Z and parameters [n]."""

    def __init__(self, comp, registry_of):
        validity = getattr(comp, "validity", None)
        self.masses = masses(validity)
        self.n = self.masses.size
        self.M = self.masses * k.M_SUN
        self.R = k.R_SUN * self.masses**0.8  # main-sequence radius, R ~ M^0.8 (common practice, no source)
        comps = compositions(validity)
        self.X, self.Z = comps[:, 0], comps[:, 1]
        self.params = default_params(comp, (self.n,))
        self._profile = comp.profile
        self._extra = {"opacity": default_opacity(registry_of())} if _takes_opacity(comp) else {}

    def label(self, i) -> str:
        return fmt_point(mass=self.masses[i], X=self.X[i], Z=self.Z[i])

    def call(self, M, R, X, Z, *values):
        return self._profile(M, R, X, Z, **self._extra, **dict(zip(self.params, values)))

    def args(self, s=slice(None)):
        return (self.M[s], self.R[s], self.X[s], self.Z[s], *(v[s] for v in self.params.values()))


def _takes_opacity(comp) -> bool:
    try:
        return "opacity" in inspect.signature(comp.profile).parameters
    except (TypeError, ValueError):  # no signature to read (a builtin or C callable): it takes none
        return False


def _stars(s: Subject) -> _Stars:
    return s.memo("profile.stars", lambda: _Stars(s.component, lambda: s.registry))


def _call(s: Subject):
    return s.memo("profile.call", lambda: s.call(_stars(s).call, *_stars(s).args()))


def _returned(s: Subject) -> bool:
    """Whether the call returned a Profile."""
    return s.component is not None and _call(s)[0] and isinstance(_call(s)[1], Profile)


def _fields(s: Subject) -> dict:
    return s.memo("profile.fields", lambda: {f: np.asarray(getattr(_call(s)[1], f), dtype=float) for f in FIELDS})


def _shaped(s: Subject) -> bool:
    if not _returned(s):
        return False
    shapes = {f: a.shape for f, a in _fields(s).items()}
    n = _stars(s).n
    return all(len(x) == 2 and x[0] == n and x == shapes["r"] and x[1] >= 2 for x in shapes.values())


def _loop(s: Subject) -> str | None:
    def outputs(p):
        return {f: np.asarray(getattr(p, f), dtype=float) for f in ("r", "rho", "T")}

    st = _stars(s)
    return s.memo("profile.loop", lambda: loop_mismatch(s, st.call, st.n, st.args, outputs, st.label, _call(s)[1]))


def check_profile_call(subject) -> CheckRow | None:
    """``profile`` runs for masses over the stated range and returns a ``Profile``."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    ok, prof = _call(s)
    if not ok:
        return CheckRow("call", False, f"raised {prof}")
    if not isinstance(prof, Profile):
        return CheckRow("call", False, f"returned {type(prof).__name__}, not a Profile")
    return CheckRow("call", True, f"profile for masses {', '.join(f'{m:.3g}' for m in _stars(s).masses)} M_sun")


def check_profile_shape(subject) -> CheckRow | None:
    """r, m, rho, P, T, beta are all [n, ngrid] arrays."""
    s = Subject.of(subject)
    if not _returned(s):
        return None
    n, shapes = _stars(s).n, {f: a.shape for f, a in _fields(s).items()}
    if _shaped(s):
        return CheckRow("shape", True, f"[{n}, {shapes['r'][1]}] arrays")
    return CheckRow("shape", False, f"array shapes {shapes}; expected [{n}, ngrid] for all")


def _layer(fields: dict, i: int, j: int, judged: str = "") -> str:
    """Where layer j of star i lies, in words: its r/R (and rho, T where finite and not the ``judged`` field),
    and which layer of how many."""
    r, g = np.asarray(fields["r"][i], dtype=float), fields["r"].shape[1]
    parts = []
    if np.isfinite(r[j]) and np.isfinite(r[-1]) and r[-1] > 0:
        parts.append(f"r/R={r[j] / r[-1]:.4g}")
    for key, unit in (("rho", "g/cm^3"), ("T", "K")):
        v = float(fields[key][i, j])
        if np.isfinite(v) and key != judged:
            parts.append(f"{key}={v:.4g} {unit}")
    return ", ".join(parts + [f"layer {int(j) + 1} of {g} from the centre"])


def check_profile_finite(subject) -> CheckRow | None:
    """r, m, rho, P, T, beta are finite everywhere."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    fields = _fields(s)
    bad = [(f, np.argwhere(~np.isfinite(a))[0]) for f, a in fields.items() if not np.isfinite(a).all()]
    if not bad:
        return CheckRow("finite", True, "r, m, rho, P, T, beta all finite")
    f, (i, j) = bad[0]
    return CheckRow("finite", False, f"{f} not finite at {_layer(fields, i, j, f)} of {_stars(s).label(i)}: "
                                     f"{float(fields[f][i, j])}")


def check_profile_physical(subject) -> CheckRow | None:
    """r and m rise from the centre to R and M; rho, P, T >= 0; 0 < beta <= 1."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    fields, st = _fields(s), _stars(s)
    problems = []
    for f in ("r", "m"):
        if np.any(np.diff(fields[f], axis=1) < 0):
            i = int(np.argwhere(np.diff(fields[f], axis=1) < 0)[0][0])
            problems.append(f"{f} decreases outwards for {st.label(i)}")
    # A model that solves for its own radius (``sets_radius = True``) must end at the R it reports, not at the
    # R it was given.
    own_R = getattr(s.original, "sets_radius", False)
    R_ref = np.asarray(_call(s)[1].R, dtype=float) if own_R else st.R
    for f, whole, name in (("r", R_ref, "R"), ("m", st.M, "M")):
        err = np.abs(fields[f][:, -1] / whole - 1.0)
        if np.any(err > SURFACE_RTOL):
            i = int(np.argmax(err))
            problems.append(f"{f} at the surface is {fields[f][i, -1]:.6g}, not {name}={whole[i]:.6g}, "
                            f"for {st.label(i)}")
    for f in ("rho", "P", "T"):
        if np.any(fields[f] < 0):
            i, j = np.argwhere(fields[f] < 0)[0]
            problems.append(f"{f} < 0 at {_layer(fields, i, j, f)} of {st.label(i)}: {fields[f][i, j]:.6g}")
    beta = fields["beta"]
    if np.any((beta <= 0) | (beta > 1)):
        i, j = np.argwhere((beta <= 0) | (beta > 1))[0]
        problems.append(f"beta outside (0, 1] at {_layer(fields, i, j)} of {st.label(i)}: {beta[i, j]:.6g}")
    return CheckRow("physical", not problems, problems[0] if problems else
                    "r and m rise from the centre to R and M; rho, P, T >= 0; 0 < beta <= 1")


def check_profile_broadcasting(subject) -> CheckRow | None:
    """Each star computed alone has the r, rho and T it has in the n-star call."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    return broadcasting_row(_loop(s), _stars(s).n)


def check_profile_warnings(subject) -> CheckRow | None:
    """No warning is emitted for stars inside the stated range."""
    s = Subject.of(subject)
    if not _returned(s):
        return None
    if not _shaped(s):
        return warnings_row(s, "during the call")
    _loop(s)
    return warnings_row(s, "inside the validity range")


def check_profile_support(subject) -> CheckRow | None:
    """A declared ``support`` returns bool [n], holds at the default parameters and agrees one star at a time."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return support_row(s, _stars(s))


# in report order
def check_profile_inputs(subject) -> CheckRow | None:
    """``profile`` leaves M, R, X, Z and the parameters as it was given them (no writes into its inputs)."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return inputs_row(s, _call, _stars(s), _Stars(s.component, lambda: s.registry),
                      {"M": "M", "R": "R", "X": "X", "Z": "Z", "params": "params"})


CHECKS = (
    Check("call", check_profile_call),
    Check("shape", check_profile_shape),
    Check("finite", check_profile_finite),
    Check("physical", check_profile_physical),
    Check("broadcasting", check_profile_broadcasting),
    Check("warnings", check_profile_warnings),
    Check("support", check_profile_support, applies=declares_support),
    Check("inputs", check_profile_inputs),
)
