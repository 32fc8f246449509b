"""Checks a plugin's components against their contracts (``radwalk check-plugin TARGET``).

A target is a plugin file, an importable module, or the name of a registered
component.  Every component it provides gets a :class:`CheckReport`: rows of
(check, passed, detail), where a failed row names the first bad point and
the value found there.

Opacity laws get the full set of checks, on a grid of log rho x log T that
covers the law's declared validity (the defaults below where it states none)
at three compositions:

``declarations``, ``params``, ``validity``
    name and description; every Param with a unit, finite bounds, a default
    inside them and a description; a Validity whose stated ranges make sense.
``call``, ``shape``
    ``kappa(rho [n, g], T [n, g], X [n, 1], Z [n, 1], **params [n, 1])``
    runs and returns shape [n, g].
``finite``, ``positive``
    every value finite and > 0 inside the validity range.
``broadcasting``
    row by row calls with scalar X, Z (and a scalar call) give the same values.
``warnings``
    no warning is emitted inside the law's own validity range.
``smoothness``
    no two neighbouring grid points differ by more than a factor
    :data:`JUMP_FACTOR` = 10.  The grid steps are at most 0.05 dex in T and
    0.1 dex in rho, over which the steepest textbook law, H-minus with
    kappa ~ rho^0.5 T^9, changes by a factor 2.8, and Kramers (rho T^-3.5) by
    1.5; a factor 10 between neighbours is a discontinuity (a switch between
    regimes without blending) or a slope beyond T^20, which no Rosseland mean
    has over such a step.
``speed``
    seconds per million evaluated points, at most :data:`SLOW_LIMIT` = 10 s: a
    sampler step of 32 walkers on a 400-point profile evaluates 12 800 points,
    so at the limit the opacity alone costs 0.13 s a step.

Other stages get the declaration checks and a basic call: a profile for
masses over the stated range must have [n, ngrid] arrays, finite, with r and
m rising to R and M; a relation must give finite positive R and L of shape
[n] with the ``combined`` opacity; a likelihood must give [n] values, never
NaN, highest at the observation itself.  All stages check that a call on n
samples equals n calls on one.
"""

from __future__ import annotations

import importlib
import math
import time
import traceback
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from radwalk import constants as k
from radwalk.constants import X_SUN, Z_SUN
from radwalk.errors import ConfigError, PluginError, RadwalkError
from radwalk.host.components import BoundOpacity, Observations, Profile
from radwalk.host.params import Option, Param, Validity
from radwalk.host.registry import Entry, Registry, suggest

# Ranges used where a component states none (K, g/cm^3, M_sun, mass fractions).
DEFAULT_RANGES = {
    "T": (3e3, 1e8), "rho": (1e-10, 1e3), "mass": (0.5, 20.0), "X": (0.0, 0.8), "Z": (1e-4, 0.04),
}
_UNITS = {"T": "K", "rho": "g/cm^3", "mass": "M_sun", "X": "", "Z": ""}
MAX_STEP_DEX = {"rho": 0.1, "T": 0.05}  # largest grid step of the opacity checks
MAX_GRID_POINTS = 400  # per axis
JUMP_FACTOR = 10.0  # largest ratio between neighbouring grid values (see the module docstring)
SLOW_LIMIT = 10.0  # s per million points
LOOP_RTOL = 1e-12  # row-by-row calls must agree to rounding
_TIMING_SECONDS = 0.1  # spend about this long timing
_STAGE_HOOKS = {"profile": "radwalk_profiles", "opacity": "radwalk_opacities",
                "relation": "radwalk_relations", "likelihood": "radwalk_likelihoods"}


# -- report ---------------------------------------------------------------
@dataclass(frozen=True)
class CheckRow:
    """One check: its name, whether it passed, and what was found."""

    check: str
    passed: bool
    detail: str


@dataclass
class CheckReport:
    """The checks of one component (or of a target that failed to load).

    Attributes
    ----------
    component : str
        Component name (the target itself if it did not load).
    stage : str
        Stage of the component ("" if it did not load).
    source : str
        Where it came from, as the registry says.
    rows : list of CheckRow
    seconds_per_million : float or None, s
        Evaluation time per million points, where measured.
    """

    component: str
    stage: str
    source: str
    rows: list[CheckRow] = field(default_factory=list)
    seconds_per_million: float | None = None

    @property
    def passed(self) -> bool:
        return bool(self.rows) and all(r.passed for r in self.rows)

    def add(self, check: str, passed: bool, detail: str) -> bool:
        self.rows.append(CheckRow(check, bool(passed), detail))
        return bool(passed)

    def row(self, check: str) -> CheckRow:
        """The row of the named check (KeyError if it was not run)."""
        for r in self.rows:
            if r.check == check:
                return r
        raise KeyError(f"no check {check!r} in the report of {self.component!r}")

    def failed(self) -> list[CheckRow]:
        return [r for r in self.rows if not r.passed]

    def format_table(self) -> str:
        """An aligned plain-text table of the checks with a closing verdict line."""
        title = f"{self.stage} component {self.component!r} ({self.source})" if self.stage \
            else f"{self.component} ({self.source})"
        width = max([len("check")] + [len(r.check) for r in self.rows])
        lines = [title, f"  {'check':<{width}}  result  detail", f"  {'-' * width}  ------  ------"]
        for r in self.rows:
            lines.append(f"  {r.check:<{width}}  {'pass' if r.passed else 'FAIL':<6}  {r.detail}")
        bad = len(self.failed())
        lines.append(f"  all {len(self.rows)} checks passed" if self.passed
                     else f"  {bad} of {len(self.rows)} checks failed")
        return "\n".join(lines)


# -- targets --------------------------------------------------------------
class _ModuleRegistry(Registry):
    """A Registry with extra modules registered by import name, after the entry points."""

    def __init__(self, modules, entry_points: bool = True):
        self._extra_modules = tuple(modules)
        self._want_entry_points = entry_points
        super().__init__(entry_points=True)

    def _load_entry_points(self):
        if self._want_entry_points:
            super()._load_entry_points()
        for module in self._extra_modules:
            self._register(module, f"module {module.__name__}")


def _all_entries(registry: Registry) -> list[Entry]:
    return [e for stage in registry.entries.values() for e in stage.values()]


def _import_module(target: str):
    """The module ``target``, None if no such module exists, PluginError if it fails to import."""
    try:
        return importlib.import_module(target)
    except ModuleNotFoundError as exc:
        if exc.name is not None and (target == exc.name or target.startswith(exc.name + ".")):
            return None
        raise PluginError(f"module {target} failed to import: ModuleNotFoundError: {exc}",
                          plugin=target) from None
    except Exception as exc:  # noqa: BLE001 - any import failure is the plugin's
        tb = traceback.extract_tb(exc.__traceback__)
        where = f" ({tb[-1].filename}, line {tb[-1].lineno})" if tb else ""
        raise PluginError(f"module {target} failed to import{where}: {type(exc).__name__}: {exc}",
                          plugin=target) from None


def resolve_target(target: str, *, entry_points: bool = True) -> tuple[Registry, list[Entry]]:
    """The registry holding ``target`` and the entries of the components it names.

    Parameters
    ----------
    target : str
        A plugin file (``*.py`` or any existing file), an importable module
        name, or the name of a registered component (every stage that has
        one of that name).
    entry_points : bool
        Whether installed entry-point plugins are loaded too.

    Returns
    -------
    registry : Registry
    entries : list of Entry

    Raises
    ------
    PluginError
        If the plugin does not load (naming the file and line where the
        registry can) or provides no component.
    ConfigError
        If ``target`` is neither a file, nor a module, nor a component name.
    """
    path = Path(target).expanduser()
    if target.endswith(".py") or path.is_file():
        registry = Registry(plugin_files=[path], entry_points=entry_points)
        source = f"file {path.resolve()}"
        entries = [e for e in _all_entries(registry) if e.source == source]
        if not entries:
            raise PluginError(f"plugin file {path.resolve()} provides no components: none of its "
                              f"@hookimpl radwalk_* hooks returned any", plugin=str(path))
        return registry, entries
    registry = Registry(entry_points=entry_points)
    named = [e for e in _all_entries(registry) if e.name == target]
    if named:
        return registry, named
    module = _import_module(target)
    if module is None:
        names = [e.name for e in _all_entries(registry)]
        raise ConfigError(f"{target!r} is not a plugin file, an importable module or a registered "
                          f"component{suggest(target, names)}; components: {', '.join(names)}")
    registry = _ModuleRegistry([module], entry_points=entry_points)
    entries = []
    for stage, hook in _STAGE_HOOKS.items():
        for impl in getattr(registry.pm.hook, hook).get_hookimpls():
            if impl.plugin is module:
                entries += [registry.entries[stage][c.name] for c in impl.function() or []]
    if not entries:
        raise PluginError(f"module {target} provides no components: none of its @hookimpl radwalk_* "
                          f"hooks returned any", plugin=target)
    return registry, entries


def check_target(target: str, *, grid_points: int | None = None, options: dict | None = None,
                 entry_points: bool = True) -> list[CheckReport]:
    """Checks every component of ``target``; a target that does not load gives one failed ``load`` row.

    Parameters
    ----------
    target : str
        As in :func:`resolve_target`.
    grid_points, options
        As in :func:`check_component`.
    entry_points : bool
        Whether installed entry-point plugins are loaded too.

    Returns
    -------
    list of CheckReport
    """
    try:
        registry, entries = resolve_target(target, entry_points=entry_points)
    except RadwalkError as exc:
        report = CheckReport(target, "", "not loaded")
        report.add("load", False, str(exc))
        return [report]
    return [check_component(e, grid_points=grid_points, options=options, registry=registry)
            for e in entries]


# -- helpers --------------------------------------------------------------
def _fmt_point(**values) -> str:
    return ", ".join(f"{key}={float(v):.6g} {_UNITS.get(key, '')}".rstrip() for key, v in values.items())


def _range(validity, key: str) -> tuple[tuple[float, float], bool]:
    """The stated range on ``key`` or the default; and whether it was stated."""
    stated = getattr(validity, key, None) if isinstance(validity, Validity) else None
    if stated is None:
        return DEFAULT_RANGES[key], False
    lo, hi = float(stated[0]), float(stated[1])
    if key in ("T", "rho", "mass") and lo <= 0:
        lo = min(DEFAULT_RANGES[key][0], hi)  # a closed range down to zero: start the log grid here
    return (lo, hi), True


def _compositions(validity) -> np.ndarray:
    """Three (X, Z) pairs spanning the X and Z ranges: middle, X low with Z high, X high with Z low."""
    (xl, xh), _ = _range(validity, "X")
    (zl, zh), _ = _range(validity, "Z")
    pairs = [(0.5 * (xl + xh), 0.5 * (zl + zh)), (xl, zh), (xh, zl)]
    return np.array([(x, min(z, 1.0 - x)) for x, z in pairs])


def _run(caught: list, fn, *args, **kwargs):
    """Calls ``fn`` recording warnings into ``caught``; returns (ok, result or exception text)."""
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        try:
            result = fn(*args, **kwargs)
        except Exception as exc:  # noqa: BLE001 - the component's failure is what we report
            caught.extend(rec)
            return False, f"{type(exc).__name__}: {exc}"
    caught.extend(rec)
    return True, result


def _time_per_million(fn, npoints: int) -> float:
    """Seconds per million points of ``fn()`` (warnings silenced: they were checked already)."""
    calls, spent = 0, 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        while calls < 3 or spent < _TIMING_SECONDS:
            t0 = time.perf_counter()
            fn()
            spent += time.perf_counter() - t0
            calls += 1
    return spent / calls / npoints * 1e6


def _default_params(component, shape) -> dict:
    return {p.name: np.full(shape, float(p.default)) for p in getattr(component, "params", ())
            if isinstance(p, Param)}


def _check_warnings(report: CheckReport, caught: list, where: str):
    if caught:
        w = caught[0]
        report.add("warnings", False, f"{len(caught)} warning(s) {where}; first: "
                                      f"{w.category.__name__}: {w.message}")
    else:
        report.add("warnings", True, f"none {where}".rstrip())


# -- declarations ---------------------------------------------------------
def _check_declarations(report: CheckReport, comp) -> None:
    name, desc = getattr(comp, "name", None), getattr(comp, "description", None)
    problems = []
    if not isinstance(name, str) or not name.strip():
        problems.append(f"name {name!r} is not a non-empty string")
    if not isinstance(desc, str) or not desc.strip():
        problems.append(f"description {desc!r} is not a non-empty string")
    report.add("declarations", not problems, "; ".join(problems) or "name and description given")

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
        report.add("params", False, problems[0] + more)
    elif not params:
        report.add("params", True, "none declared")
    else:
        names = ", ".join(p.name for p in params)
        report.add("params", True,
                   f"{len(params)} declared ({names}), each with unit, bounds and description")

    options = getattr(comp, "options", ())
    if options:
        bad = [o for o in options if not isinstance(o, Option)]
        if bad:
            report.add("options", False, f"{bad[0]!r} is not a radwalk.host.params.Option")
        elif not callable(getattr(comp, "configure", None)):
            report.add("options", False, "declares options but has no configure(**options) method")
        else:
            report.add("options", True, f"{', '.join(o.name for o in options)}, with configure()")

    validity = getattr(comp, "validity", None)
    if not isinstance(validity, Validity):
        report.add("validity", False,
                   f"validity is {type(validity).__name__}, not a radwalk.host.params.Validity")
        return
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
    needed = {"opacity": ("T", "rho"), "profile": ("mass",), "relation": ("mass",)}.get(report.stage, ())
    for key in needed:
        if getattr(validity, key) is None:
            lo, hi = DEFAULT_RANGES[key]
            used.append(f"no {key} range stated: checked over {lo:g}..{hi:g} {_UNITS[key]}".rstrip())
    if problems:
        report.add("validity", False, problems[0])
    else:
        report.add("validity", True, "; ".join([validity.describe()] + used))


# -- opacity --------------------------------------------------------------
def _opacity_grid(validity, grid_points):
    axes = {}
    for key in ("rho", "T"):
        (lo, hi), _ = _range(validity, key)
        span = math.log10(hi / lo)
        n = grid_points or min(MAX_GRID_POINTS, max(5, math.ceil(span / MAX_STEP_DEX[key] - 1e-9) + 1))
        axes[key] = np.geomspace(lo, hi, n) if hi > lo else np.full(1, lo)
    return axes["rho"], axes["T"]


def _check_opacity(report: CheckReport, comp, grid_points) -> None:
    rho_axis, T_axis = _opacity_grid(getattr(comp, "validity", None), grid_points)
    comps = _compositions(getattr(comp, "validity", None))
    nc, g = comps.shape[0], rho_axis.size * T_axis.size
    R, T = (np.broadcast_to(a.ravel(), (nc, g)).copy()
            for a in np.meshgrid(rho_axis, T_axis, indexing="ij"))
    X, Z = comps[:, :1].copy(), comps[:, 1:].copy()
    params = _default_params(comp, (nc, 1))
    caught: list = []

    def point(i, j):
        return _fmt_point(rho=R[i, j], T=T[i, j], X=X[i, 0], Z=Z[i, 0])

    ok, out = _run(caught, comp.kappa, R, T, X, Z, **params)
    grid_text = (f"{nc} compositions x {rho_axis.size} rho x {T_axis.size} T "
                 f"(rho {rho_axis[0]:g}..{rho_axis[-1]:g} g/cm^3, T {T_axis[0]:g}..{T_axis[-1]:g} K)")
    if not report.add("call", ok, f"kappa on {grid_text}" if ok else
                      f"kappa(rho [{nc}, {g}], T [{nc}, {g}], X [{nc}, 1], Z [{nc}, 1]) raised {out}"):
        return
    out = np.asarray(out)
    if not report.add("shape", out.shape == (nc, g),
                      f"[{nc}, {g}] as the inputs" if out.shape == (nc, g) else
                      f"returned shape {list(out.shape)} for rho, T [{nc}, {g}] with X, Z [{nc}, 1]; "
                      f"expected [{nc}, {g}]"):
        _check_warnings(report, caught, "during the call")
        return
    try:
        out = out.astype(float)
    except (TypeError, ValueError):
        report.add("finite", False, f"returned {out.dtype} values, not numbers")
        return

    finite = np.isfinite(out)
    if finite.all():
        report.add("finite", True, f"all {out.size} values finite")
    else:
        i, j = np.argwhere(~finite)[0]
        report.add("finite", False, f"{int((~finite).sum())} of {out.size} values not finite; first at "
                                    f"{point(i, j)}: kappa={out[i, j]}")
    positive = ~finite | (out > 0)
    if positive.all():
        report.add("positive", True, "all finite values > 0")
    else:
        i, j = np.argwhere(~positive)[0]
        report.add("positive", False, f"{int((~positive).sum())} of {out.size} values <= 0; first at "
                                      f"{point(i, j)}: kappa={out[i, j]:.6g} cm^2/g")

    mismatch = None
    for i in range(nc):
        row_params = {name: float(v[i, 0]) for name, v in params.items()}
        ok, row = _run(caught, comp.kappa, R[i], T[i], float(X[i, 0]), float(Z[i, 0]), **row_params)
        if not ok:
            mismatch = f"a call for sample {i} with scalar X, Z raised {row}"
            break
        row = np.asarray(row, dtype=float)
        if row.shape != (g,):
            mismatch = f"a call with rho, T [{g}] and scalar X, Z returned shape {list(row.shape)}"
            break
        same = np.isclose(row, out[i], rtol=LOOP_RTOL, atol=0.0, equal_nan=True)
        if not same.all():
            j = int(np.flatnonzero(~same)[0])
            mismatch = (f"sample {i} alone gives {row[j]:.6g} but {out[i, j]:.6g} in the [n, g] call, "
                        f"at {point(i, j)}")
            break
    if mismatch is None:
        ok, one = _run(caught, comp.kappa, float(R[0, 0]), float(T[0, 0]), float(X[0, 0]),
                       float(Z[0, 0]), **{name: float(v[0, 0]) for name, v in params.items()})
        if not ok:
            mismatch = f"a call with scalars raised {one}"
        elif np.ndim(one) != 0:
            mismatch = f"a call with scalars returned shape {list(np.shape(one))}, not a scalar"
        elif not np.isclose(float(one), out[0, 0], rtol=LOOP_RTOL, atol=0.0, equal_nan=True):
            mismatch = f"a call with scalars gives {float(one):.6g} but {out[0, 0]:.6g} in the [n, g] call"
    report.add("broadcasting", mismatch is None,
               mismatch or f"{nc} row-by-row calls with scalar X, Z and a scalar call equal the [n, g] call")
    _check_warnings(report, caught, "inside the validity range")

    with np.errstate(divide="ignore", invalid="ignore"):
        logk = np.where(finite & (out > 0), np.log10(np.where(out > 0, out, 1.0)), np.nan)
    cube = logk.reshape(nc, rho_axis.size, T_axis.size)
    limit = math.log10(JUMP_FACTOR)
    largest, first = 0.0, None  # first: (sample, index of the lower point, index of its neighbour)
    for axis in (1, 2):
        step = np.abs(np.diff(cube, axis=axis))
        if np.all(np.isnan(step)):
            continue
        largest = max(largest, float(np.nanmax(step)))
        over = np.argwhere(np.nan_to_num(step, nan=0.0) > limit)
        if over.size:
            c, a, b = over[0]
            j = a * T_axis.size + b
            j2 = j + (T_axis.size if axis == 1 else 1)
            if first is None or (c, j) < first[:2]:
                first = (c, j, j2)
    steps = (f"steps {math.log10(rho_axis[-1] / rho_axis[0]) / max(rho_axis.size - 1, 1):.3g} dex in rho, "
             f"{math.log10(T_axis[-1] / T_axis[0]) / max(T_axis.size - 1, 1):.3g} dex in T")
    if first is None:
        report.add("smoothness", True, f"largest ratio between neighbours {10 ** largest:.3g} "
                                       f"(limit {JUMP_FACTOR:g}; {steps})")
    else:
        i, j, j2 = first
        factor = max(out[i, j], out[i, j2]) / min(out[i, j], out[i, j2])
        report.add("smoothness", False,
                   f"kappa jumps by a factor {factor:.3g} (limit {JUMP_FACTOR:g}; {steps}) between "
                   f"{point(i, j)}: kappa={out[i, j]:.6g} and {_fmt_point(rho=R[i, j2], T=T[i, j2])}: "
                   f"kappa={out[i, j2]:.6g}; largest ratio anywhere {10 ** largest:.3g}")

    per_million = _time_per_million(lambda: comp.kappa(R, T, X, Z, **params), out.size)
    report.seconds_per_million = per_million
    report.add("speed", per_million <= SLOW_LIMIT,
               f"{per_million:.3g} s per million points (limit {SLOW_LIMIT:g} s)")


# -- other stages ----------------------------------------------------------
def _masses(validity, n: int = 3) -> np.ndarray:
    (lo, hi), _ = _range(validity, "mass")
    return np.geomspace(lo, hi, n) if hi > lo else np.full(n, lo)


def _compare_loop(report, caught, fn, n, args_of, outputs_of, label, full) -> None:
    """Runs ``fn`` on each sample alone and compares with ``full``, the outputs of the n-sample call."""
    full = outputs_of(full)
    mismatch = None
    for i in range(n):
        ok, res = _run(caught, fn, *args_of(slice(i, i + 1)))
        if not ok:
            mismatch = f"a call for {label(i)} alone raised {res}"
            break
        for name, one in outputs_of(res).items():
            whole = full[name][i:i + 1]
            if one.size != whole.size or not np.allclose(one.reshape(whole.shape), whole, rtol=1e-9,
                                                         atol=0.0, equal_nan=True):
                mismatch = f"{name} of {label(i)} differs when called alone"
                break
        if mismatch:
            break
    report.add("broadcasting", mismatch is None,
               mismatch or f"{n} one-sample calls equal the {n}-sample call")


def _check_profile(report: CheckReport, comp) -> None:
    validity = getattr(comp, "validity", None)
    masses = _masses(validity)
    n = masses.size
    M = masses * k.M_SUN
    R = k.R_SUN * masses**0.8  # main-sequence radius, R ~ M^0.8 (common practice, no source)
    comps = _compositions(validity)
    X, Z = comps[:, 0], comps[:, 1]
    params = _default_params(comp, (n,))
    caught: list = []

    def label(i):
        return _fmt_point(mass=masses[i], X=X[i], Z=Z[i])

    def call(M_, R_, X_, Z_, *pv):
        return comp.profile(M_, R_, X_, Z_, **dict(zip(params, pv)))

    def args_of(s):
        return (M[s], R[s], X[s], Z[s], *(v[s] for v in params.values()))

    ok, prof = _run(caught, call, *args_of(slice(None)))
    if not ok:
        report.add("call", False, f"raised {prof}")
        return
    if not report.add("call", isinstance(prof, Profile),
                      f"profile for masses {', '.join(f'{m:.3g}' for m in masses)} M_sun"
                      if isinstance(prof, Profile) else f"returned {type(prof).__name__}, not a Profile"):
        return
    fields = {f: np.asarray(getattr(prof, f), dtype=float) for f in ("r", "m", "rho", "P", "T", "beta")}
    shapes = {f: a.shape for f, a in fields.items()}
    good = all(len(s) == 2 and s[0] == n and s == shapes["r"] and s[1] >= 2 for s in shapes.values())
    if not report.add("shape", good, f"[{n}, {shapes['r'][1]}] arrays" if good else
                      f"array shapes {shapes}; expected [{n}, ngrid] for all"):
        _check_warnings(report, caught, "during the call")
        return
    bad = [(f, np.argwhere(~np.isfinite(a))[0]) for f, a in fields.items() if not np.isfinite(a).all()]
    if bad:
        f, (i, j) = bad[0]
        report.add("finite", False, f"{f} not finite at grid point {j} of {label(i)}: {fields[f][i, j]}")
    else:
        report.add("finite", True, "r, m, rho, P, T, beta all finite")
    problems = []
    for f in ("r", "m"):
        if np.any(np.diff(fields[f], axis=1) < 0):
            i = int(np.argwhere(np.diff(fields[f], axis=1) < 0)[0][0])
            problems.append(f"{f} decreases outwards for {label(i)}")
    for f, whole, name in (("r", R, "R"), ("m", M, "M")):
        err = np.abs(fields[f][:, -1] / whole - 1.0)
        if np.any(err > 1e-3):
            i = int(np.argmax(err))
            problems.append(f"{f} at the surface is {fields[f][i, -1]:.6g}, not {name}={whole[i]:.6g}, "
                            f"for {label(i)}")
    for f in ("rho", "P", "T"):
        if np.any(fields[f] < 0):
            i, j = np.argwhere(fields[f] < 0)[0]
            problems.append(f"{f} < 0 at grid point {j} of {label(i)}: {fields[f][i, j]:.6g}")
    beta = fields["beta"]
    if np.any((beta <= 0) | (beta > 1)):
        i, j = np.argwhere((beta <= 0) | (beta > 1))[0]
        problems.append(f"beta outside (0, 1] at grid point {j} of {label(i)}: {beta[i, j]:.6g}")
    report.add("physical", not problems, problems[0] if problems else
               "r and m rise from the centre to R and M; rho, P, T >= 0; 0 < beta <= 1")
    def outputs(p):
        return {f: np.asarray(getattr(p, f), dtype=float) for f in ("r", "rho", "T")}

    _compare_loop(report, caught, call, n, args_of, outputs, label, prof)
    _check_warnings(report, caught, "inside the validity range")


def _check_relation(report: CheckReport, comp, registry: Registry | None) -> None:
    registry = registry or Registry()
    names = registry.names("opacity")
    law = registry.get("opacity", "combined" if "combined" in names else names[0])
    opacity = BoundOpacity(law, {p.name: p.default for p in law.params})
    validity = getattr(comp, "validity", None)
    masses = _masses(validity)
    n = masses.size
    M = masses * k.M_SUN
    comps = _compositions(validity)
    X, Z = comps[:, 0], comps[:, 1]
    params = _default_params(comp, (n,))
    caught: list = []

    def label(i):
        return _fmt_point(mass=masses[i], X=X[i], Z=Z[i])

    def call(M_, X_, Z_, *pv):
        return comp.predict(M_, X_, Z_, opacity, **dict(zip(params, pv)))

    ok, res = _run(caught, call, M, X, Z, *params.values())
    mass_text = ", ".join(f"{m:.3g}" for m in masses)
    if not report.add("call", ok, f"predict with the {law.name!r} opacity for masses {mass_text} M_sun"
                      if ok else f"raised {res}"):
        return
    try:
        Rp, Lp = (np.asarray(v, dtype=float) for v in res)
    except (TypeError, ValueError):
        report.add("shape", False, f"returned {type(res).__name__}, not a pair (R, L)")
        return
    if not report.add("shape", Rp.shape == (n,) and Lp.shape == (n,),
                      f"R and L [{n}]" if Rp.shape == (n,) == Lp.shape else
                      f"R shape {list(Rp.shape)}, L shape {list(Lp.shape)}; expected [{n}] each"):
        return
    bad = ~(np.isfinite(Rp) & np.isfinite(Lp) & (Rp > 0) & (Lp > 0))
    i = int(np.argmax(bad))
    report.add("finite", not bad.any(), f"R={Rp[i]:.6g} cm, L={Lp[i]:.6g} erg/s for {label(i)}"
               if bad.any() else "R and L finite and positive")

    def outputs(r):
        return {"R": np.asarray(r[0], dtype=float), "L": np.asarray(r[1], dtype=float)}

    _compare_loop(report, caught, call, n, lambda s: (M[s], X[s], Z[s], *(v[s] for v in params.values())),
                  outputs, label, res)
    _check_warnings(report, caught, "inside the validity range")


def _check_likelihood(report: CheckReport, comp) -> None:
    observed = Observations(values={"radius": k.R_SUN, "luminosity": k.L_SUN, "teff": k.TEFF_SUN},
                            errors={"radius": 0.01 * k.R_SUN, "luminosity": 0.02 * k.L_SUN, "teff": 50.0})
    scale = np.array([1.0, 1.1, 0.5])  # the observation itself, near it, far from it
    n = scale.size
    predicted = {"radius": k.R_SUN * scale, "luminosity": k.L_SUN * scale, "teff": k.TEFF_SUN * scale}
    params = _default_params(comp, (n,))
    caught: list = []

    def call(s):
        return comp.loglike({key: v[s] for key, v in predicted.items()}, observed,
                            **{name: v[s] for name, v in params.items()})

    ok, ll = _run(caught, call, slice(None))
    if not report.add("call", ok, "loglike at the observed Sun, 1.1x and 0.5x it" if ok else f"raised {ll}"):
        return
    ll = np.asarray(ll, dtype=float)
    if not report.add("shape", ll.shape == (n,), f"[{n}]" if ll.shape == (n,) else
                      f"returned shape {list(ll.shape)}; expected [{n}]"):
        return
    problems = []
    if np.isnan(ll).any():
        problems.append(f"NaN for predictions {scale[np.isnan(ll)][0]:g}x the observation")
    elif not np.isfinite(ll[0]):
        problems.append(f"{ll[0]} at the observation itself")
    elif not (ll[0] > ll[1] > ll[2]):
        values = ", ".join(f"{v:.6g}" for v in ll)
        problems.append(f"not highest at the observation: {values} for 1, 1.1, 0.5x")
    report.add("values", not problems, problems[0] if problems else
               f"never NaN, highest at the observation ({', '.join(f'{v:.4g}' for v in ll)})")
    _compare_loop(report, caught, call, n, lambda s: (s,), lambda r: {"loglike": np.asarray(r, dtype=float)},
                  lambda i: f"prediction {scale[i]:g}x the observation", ll)
    _check_warnings(report, caught, "")


# -- entry point ------------------------------------------------------------
def check_component(entry: Entry, grid_points: int | None = None, *, options: dict | None = None,
                    registry: Registry | None = None) -> CheckReport:
    """Checks one registered component against its stage's contract.

    Parameters
    ----------
    entry : Entry
        From :func:`resolve_target` or ``Registry.entries``.
    grid_points : int, optional
        Points per axis of the opacity grid; by default enough for steps of
        at most 0.05 dex in T and 0.1 dex in rho (at most 400 per axis).  The
        smoothness limit refers to the steps of this grid.
    options : dict, optional
        Text options (e.g. ``{"table": "my.ecsv"}``) passed to the component's
        ``configure`` first.
    registry : Registry, optional
        Where a relation's check finds its opacity law (``combined``); a
        fresh one is built if needed.

    Returns
    -------
    CheckReport
    """
    comp = entry.component
    report = CheckReport(entry.name, entry.stage, entry.source)
    if options:
        if not callable(getattr(comp, "configure", None)):
            report.add("configure", False, f"options {', '.join(options)} given, but the component has no "
                                           f"configure(**options)")
            return report
        ok, res = _run([], comp.configure, **options)
        given = ", ".join(f"{a}={b}" for a, b in options.items())
        if not report.add("configure", ok, f"configured with {given}" if ok else f"configure raised {res}"):
            return report
        comp = res
    _check_declarations(report, comp)
    if entry.stage == "opacity":
        _check_opacity(report, comp, grid_points)
    elif entry.stage == "profile":
        _check_profile(report, comp)
    elif entry.stage == "relation":
        _check_relation(report, comp, registry)
    elif entry.stage == "likelihood":
        _check_likelihood(report, comp)
    return report


# -- picture ------------------------------------------------------------------
def plot_log_kappa_map(entry, path, *, X: float | None = None, Z: float | None = None,
                       options: dict | None = None, grid_points: int = 160) -> Path:
    """Writes a PNG of log10 kappa over log10 T and log10 rho with the validity range outlined.

    The map reaches 15 % of each span beyond the range (at least 0.3 dex) so
    that the outline shows where the law stops being trusted; warnings from
    evaluating out there are expected and not passed on.  A law that refuses
    points outside its range (an error) is drawn inside it only.

    Parameters
    ----------
    entry : Entry or opacity component
    path : str or Path
        PNG file to write (atomically).
    X, Z : float, optional
        Composition; by default the solar one (Asplund et al. 2009) moved
        into the stated ranges.
    options : dict, optional
        Passed to the component's ``configure`` first.
    grid_points : int
        Points per axis.

    Returns
    -------
    Path
        The file written.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Rectangle

    from radwalk.results.files import atomic_path

    comp = getattr(entry, "component", entry)
    if getattr(entry, "stage", "opacity") != "opacity" or not callable(getattr(comp, "kappa", None)):
        name = getattr(comp, "name", comp)
        raise ConfigError(f"plot_log_kappa_map draws opacity laws; {name!r} is not one")
    if options:
        comp = comp.configure(**options)
    validity = getattr(comp, "validity", None)
    (rlo, rhi), r_stated = _range(validity, "rho")
    (tlo, thi), t_stated = _range(validity, "T")
    if X is None:
        (lo, hi), _ = _range(validity, "X")
        X = min(max(X_SUN, lo), hi)
    if Z is None:
        (lo, hi), _ = _range(validity, "Z")
        Z = min(max(Z_SUN, lo), hi)
    X, Z = float(X), float(Z)
    lims = []
    for lo, hi in ((math.log10(tlo), math.log10(thi)), (math.log10(rlo), math.log10(rhi))):
        pad = max(0.15 * (hi - lo), 0.3)
        lims.append((lo - pad, hi + pad))
    lt = np.linspace(*lims[0], grid_points)
    lr = np.linspace(*lims[1], grid_points)
    LT, LR = np.meshgrid(lt, lr)
    params = {p.name: float(p.default) for p in getattr(comp, "params", ()) if isinstance(p, Param)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            kappa = np.asarray(comp.kappa(10.0**LR, 10.0**LT, X, Z, **params), dtype=float)
        except RadwalkError:
            inside = (LT >= math.log10(tlo)) & (LT <= math.log10(thi)) & (LR >= math.log10(rlo)) & (
                LR <= math.log10(rhi))
            kappa = np.full(LT.shape, np.nan)
            kappa[inside] = comp.kappa(10.0 ** LR[inside], 10.0 ** LT[inside], X, Z, **params)
        with np.errstate(divide="ignore", invalid="ignore"):
            logk = np.where(kappa > 0, np.log10(np.where(kappa > 0, kappa, 1.0)), np.nan)

    fig, ax = plt.subplots(figsize=(6.4, 4.8))
    try:
        mesh = ax.pcolormesh(LT, LR, np.ma.masked_invalid(logk), shading="auto", cmap="viridis")
        fig.colorbar(mesh, ax=ax, label=r"$\log_{10}\,\kappa$ [cm$^2$ g$^{-1}$]")
        stated = r_stated and t_stated
        # red shows on the colour map and on the blank parts a refusing law leaves outside its range
        outline = Rectangle((math.log10(tlo), math.log10(rlo)), math.log10(thi / tlo), math.log10(rhi / rlo),
                            fill=False, edgecolor="red", linewidth=1.5, linestyle="-" if stated else "--",
                            label="stated validity" if stated else "validity (default where not stated)")
        ax.add_patch(outline)
        ax.set_xlabel(r"$\log_{10}\,T$ [K]")
        ax.set_ylabel(r"$\log_{10}\,\rho$ [g cm$^{-3}$]")
        ax.set_title(f"{getattr(comp, 'name', 'opacity')}: X = {X:g}, Z = {Z:g}")
        ax.legend(loc="lower right", fontsize="small", framealpha=0.6)
        path = Path(path)
        with atomic_path(path, suffix=".png") as tmp:
            fig.savefig(tmp, format="png", dpi=100)
    finally:
        plt.close(fig)
    return path
