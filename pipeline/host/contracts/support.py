"""The ``support`` check, for components that declare a joint support (an optional method).

A component may declare ``support(M, X, Z, **params) -> bool [n]`` (M in g,
its own parameters by name, ``opacity=`` the bound opacity stage if it takes
that keyword): where its model exists and its prior is non-zero.  The host
sets the posterior to -inf outside it and keeps prior draws inside it
(:meth:`radwalk.forward.stages.StageSet.support`).  The check calls it for
the stage's check stars with every parameter at its default: it must return
a bool array [n], hold there (a component whose defaults lie outside its own
support has no default star), and give each star alone the answer it gives
in the n-star call.
"""

from __future__ import annotations

import inspect

import numpy as np

from radwalk.host.contracts.inputs import default_opacity
from radwalk.host.contracts.outcome import CheckRow


def declares_support(subject) -> bool:
    """Whether the component declares a ``support`` method (the check applies only then)."""
    return callable(getattr(subject.original, "support", None))


def _takes_opacity(fn) -> bool:
    try:
        return "opacity" in inspect.signature(fn).parameters
    except (TypeError, ValueError):
        return False


def support_row(s, stars) -> CheckRow | None:
    """The ``support`` row for a Subject ``s`` and its stage's check stars (M g, X, Z, params [n], label)."""
    fn = getattr(s.component, "support", None) if s.component is not None else None
    if not callable(fn):
        return None
    extra = {"opacity": default_opacity(s.registry)} if _takes_opacity(fn) else {}

    def call(sl=slice(None)):
        return fn(stars.M[sl], stars.X[sl], stars.Z[sl], **extra, **{k: v[sl] for k, v in stars.params.items()})

    ok, res = s.call(call)
    if not ok:
        return CheckRow("support", False, f"support raised {res}")
    res = np.asarray(res)
    if res.dtype != bool or res.shape != (stars.n,):
        return CheckRow("support", False, f"support returned {res.dtype} of shape {list(res.shape)}; "
                                          f"expected bool [{stars.n}]")
    if not res.all():
        i = int(np.argmin(res))
        return CheckRow("support", False, f"False at the default parameters for {stars.label(i)}: the defaults "
                                          "must lie inside the component's own support")
    for i in range(stars.n):
        ok, one = s.call(call, slice(i, i + 1))
        if not ok or np.asarray(one).reshape(-1).tolist() != [bool(res[i])]:
            return CheckRow("support", False, f"{stars.label(i)} alone gives {one!r}, not {bool(res[i])}")
    return CheckRow("support", True, f"bool [{stars.n}], True at the default parameters, the same one star at a time")
