"""Checks every component gets, whatever its stage: options, name, parameters, validity range."""

from __future__ import annotations

import math

from radwalk.host.contracts.inputs import DEFAULT_RANGES, UNITS
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.signature import check_signature
from radwalk.host.contracts.subject import Check, Subject
from radwalk.host.params import Option, Param, Validity
from radwalk.host.stages import BY_NAME


def check_configure(subject) -> CheckRow | None:
    """``configure(**options)`` accepts the options given (only when options are given)."""
    s = Subject.of(subject)
    if not s.options:
        return None
    ok, res = s.configured()
    given = ", ".join(f"{a}={b}" for a, b in s.options.items())
    return CheckRow("configure", ok, f"configured with {given}" if ok else res)


def check_declarations(subject) -> CheckRow | None:
    """``name`` and ``description`` are non-empty strings."""
    comp = Subject.of(subject).component
    if comp is None:
        return None
    name, desc = getattr(comp, "name", None), getattr(comp, "description", None)
    problems = []
    if not isinstance(name, str) or not name.strip():
        problems.append(f"name {name!r} is not a non-empty string")
    if not isinstance(desc, str) or not desc.strip():
        problems.append(f"description {desc!r} is not a non-empty string")
    return CheckRow("declarations", not problems, "; ".join(problems) or "name and description given")


def check_params(subject) -> CheckRow | None:
    """Every ``Param`` has a unit string, finite increasing bounds, a default inside them and a description."""
    comp = Subject.of(subject).component
    if comp is None:
        return None
    params = getattr(comp, "params", None)
    problems = []
    if not isinstance(params, (tuple, list)):
        problems.append(f"params is {type(params).__name__}, not a tuple of Param")
    else:
        for p in params:
            if not isinstance(p, Param):
                problems.append(f"{p!r} is not a radwalk.host.params.Param")
                continue
            if not isinstance(p.unit, str):
                problems.append(f"{p.name}: unit {p.unit!r} is not a string ('' for dimensionless)")
            if not (math.isfinite(p.lower) and math.isfinite(p.upper) and p.lower < p.upper):
                problems.append(f"{p.name}: bounds [{p.lower:g}, {p.upper:g}] are not finite and increasing")
            elif not p.lower <= p.default <= p.upper:
                problems.append(f"{p.name}: default {p.default:g} is outside [{p.lower:g}, {p.upper:g}]")
            if not isinstance(p.description, str) or not p.description.strip():
                problems.append(f"{p.name}: no description")
    if problems:
        more = f" (+{len(problems) - 1} more)" if len(problems) > 1 else ""
        return CheckRow("params", False, problems[0] + more)
    if not params:
        return CheckRow("params", True, "none declared")
    names = ", ".join(p.name for p in params)
    return CheckRow("params", True, f"{len(params)} declared ({names}), each with unit, bounds and description")


def check_options(subject) -> CheckRow | None:
    """Declared text options are ``Option`` records and the component has ``configure(**options)``."""
    comp = Subject.of(subject).component
    options = getattr(comp, "options", ()) if comp is not None else ()
    if not options:
        return None
    bad = [o for o in options if not isinstance(o, Option)]
    if bad:
        return CheckRow("options", False, f"{bad[0]!r} is not a radwalk.host.params.Option")
    if not callable(getattr(comp, "configure", None)):
        return CheckRow("options", False, "declares options but has no configure(**options) method")
    return CheckRow("options", True, f"{', '.join(o.name for o in options)}, with configure()")


def check_validity(subject) -> CheckRow | None:
    """``validity`` is a ``Validity`` whose stated ranges are finite, increasing and physical."""
    s = Subject.of(subject)
    comp = s.component
    if comp is None:
        return None
    validity = getattr(comp, "validity", None)
    if not isinstance(validity, Validity):
        return CheckRow("validity", False,
                        f"validity is {type(validity).__name__}, not a radwalk.host.params.Validity")
    problems, used = [], []
    for key in ("T", "rho", "mass", "X", "Z"):
        stated = getattr(validity, key)
        if stated is None:
            continue
        try:
            lo, hi = (float(v) for v in stated)
        except (TypeError, ValueError):
            problems.append(f"{key} range {stated!r} is not two numbers")
            continue
        if not (math.isfinite(lo) and math.isfinite(hi) and lo <= hi):
            problems.append(f"{key} range ({lo:g}, {hi:g}) is not finite and increasing")
        elif key in ("X", "Z") and not (0.0 <= lo and hi <= 1.0):
            problems.append(f"{key} range ({lo:g}, {hi:g}) is not within [0, 1]")
        elif lo < 0:
            problems.append(f"{key} range ({lo:g}, {hi:g}) goes below zero")
    # the ranges this stage's checks span: a missing one is not wrong, but the reader should know
    for key in BY_NAME[s.stage].range_keys:
        if getattr(validity, key) is None:
            lo, hi = DEFAULT_RANGES[key]
            used.append(f"no {key} range stated: checked over {lo:g}..{hi:g} {UNITS[key]}".rstrip())
    if problems:
        return CheckRow("validity", False, problems[0])
    return CheckRow("validity", True, "; ".join([validity.describe()] + used))


def _has_options(s: Subject) -> bool:
    return bool(getattr(s.original, "options", ()))


# in report order, before the stage's own checks
CHECKS = (
    Check("configure", check_configure, applies=lambda s: bool(s.options)),
    Check("declarations", check_declarations),
    Check("params", check_params),
    Check("signature", check_signature),
    Check("options", check_options, applies=_has_options),
    Check("validity", check_validity),
)
