"""The ``signature`` check: the keyword arguments of a stage method against the parameters the component declares.

The host passes a stage method (``kappa``, ``profile``, ``predict``,
``loglike``) its fixed arguments and then one keyword per declared ``Param``,
nothing else.  So a keyword the method takes but no Param declares is never
given: it silently stays at the method's default, whatever the run config
says; a name read from ``**params`` (``params["kappa_0"]``,
``params.get("kappa_0", 1.0)``) without a Param is the same mistake; and a
declared Param the method cannot take makes every call fail.
"""

from __future__ import annotations

import ast
import inspect
import textwrap

from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Subject
from radwalk.host.params import Param
from radwalk.host.stages import BY_NAME

# Keywords the host passes besides the declared parameters: a profile that takes ``opacity`` gets the bound law.
_EXTRA_HOST_ARGS = {"profile": ("opacity",)}


def host_arguments(stage_name: str) -> tuple[str, ...]:
    """The arguments the host gives a stage method besides the declared parameters (``rho, T, X, Z`` for kappa)."""
    stage = BY_NAME[stage_name]
    sig = inspect.signature(getattr(stage.protocol, stage.method))
    fixed = tuple(p.name for p in sig.parameters.values()
                  if p.name != "self" and p.kind not in (p.VAR_KEYWORD, p.VAR_POSITIONAL))
    return fixed + _EXTRA_HOST_ARGS.get(stage_name, ())


def _keys_read(fn, kwargs_name: str) -> list[str]:
    """Names read from the ``**kwargs_name`` dict in ``fn``: ``d["a"]``, ``d.get("a")``, ``d.pop("a")``."""
    try:
        tree = ast.parse(textwrap.dedent(inspect.getsource(fn)))
    except (OSError, TypeError, SyntaxError):
        return []
    found = []
    for node in ast.walk(tree):
        key = None
        if isinstance(node, ast.Subscript) and isinstance(node.value, ast.Name) and node.value.id == kwargs_name:
            key = node.slice
        elif (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
              and isinstance(node.func.value, ast.Name) and node.func.value.id == kwargs_name
              and node.func.attr in ("get", "pop", "setdefault") and node.args):
            key = node.args[0]
        if isinstance(key, ast.Constant) and isinstance(key.value, str) and key.value not in found:
            found.append(key.value)
    return found


def check_signature(subject) -> CheckRow | None:
    """The stage method takes exactly the declared parameters as keywords (none undeclared, none missing)."""
    s = Subject.of(subject)
    comp = s.component
    if comp is None:
        return None
    method_name = BY_NAME[s.stage].method
    method = getattr(comp, method_name, None)
    try:
        sig = inspect.signature(method)
    except (TypeError, ValueError):
        return None
    declared = [p.name for p in getattr(comp, "params", ()) or () if isinstance(p, Param)]
    host = set(host_arguments(s.stage))
    var_kw = next((p.name for p in sig.parameters.values() if p.kind == p.VAR_KEYWORD), None)
    taken = {p.name: p for p in sig.parameters.values()
             if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY) and p.name != "self"}
    problems = []
    for name, p in taken.items():
        if name in host or name in declared:
            continue
        if p.default is p.empty:
            problems.append(f"{method_name}() requires {name!r}, which no Param declares: the host never passes "
                            f"it, so every call fails; declare it in params")
        else:
            problems.append(f"{method_name}() takes {name}={p.default!r}, but no Param declares {name!r}: the host "
                            f"never passes it, so it always stays {p.default!r} whatever the run sets; declare it "
                            f"in params (Param({name!r}, unit, lower, upper, default, description)) or make it a "
                            "constant")
    if var_kw is not None:
        for name in _keys_read(method, var_kw):
            if name not in declared and name not in host:
                problems.append(f"{method_name}() reads {var_kw}[{name!r}], but no Param declares {name!r}: the "
                                f"host never passes it; declare it in params")
    else:
        for name in declared:
            if name not in taken:
                problems.append(f"Param {name!r} is declared but {method_name}() does not take it (nor **params): "
                                f"every call with it fails; add it to {method_name}()'s keyword arguments")
    if problems:
        more = f" (+{len(problems) - 1} more)" if len(problems) > 1 else ""
        return CheckRow("signature", False, problems[0] + more)
    if not declared:
        fixed = ", ".join(host_arguments(s.stage))
        return CheckRow("signature", True, f"{method_name}() takes no parameters beyond {fixed}")
    return CheckRow("signature", True, f"{method_name}() takes the declared {', '.join(declared)}")
