"""A grid of main-sequence tracks over mass and metallicity, cached on disk and interpolated at (M, Z, age).

Each track (:func:`radwalk.physics.structure.evolution.evolve`) is resampled
on the phase age / t_MS (:mod:`radwalk.physics.structure.tracks`), so a grid
is a table ``[n_mass, n_Z, n_phase, n_quantities]`` plus the lifetimes
``[n_mass, n_Z]``.  A star at (M, Z, age) is found in two steps: the lifetime
t_MS(M, Z) is interpolated across the grid (cubic in log M and log Z, of
log t_MS), which gives the phase age / t_MS; every stored quantity is then
interpolated in (log M, log Z, phase).

Interpolation: along log M and log Z by Lagrange polynomials through the
nearest 4 nodes (fewer on a smaller axis; Press et al., *Numerical Recipes*,
sect. 3.2) for the smooth quantities, stored as log10 (R, L, T_eff, central
conditions, timescales); linearly for the bounded ones (central X, core and
envelope fractions), whose kinks where a convective core or envelope appears
a cubic would ring across; linearly in phase (51 points by default).  A
quantity that is NaN at any node the stencil uses (a turnover time where a
neighbour has no convective envelope) is NaN.  The measured leave-one-out
errors are in the Notes of :func:`leave_one_out` and in the report of the
work that added this module.

Composition rule (default): Y = Y_p + (dY/dZ) Z with Y_p = 0.2471, the
primordial helium of standard BBN at the Planck 2018 baryon density (Planck
Collaboration 2020, A&A 641, A6; from memory), and dY/dZ fixed by the
calibrated Sun's initial Y0 and Z0 (:mod:`radwalk.physics.structure.calibration`;
common practice, no source).  With today's calibration dY/dZ = 3.95, above the
~1.5-3 usually inferred from nearby stars and H II regions (from memory): the
calibrated Y0 = 0.296 carries the analytic opacity's and the missing
diffusion's errors.  It is a placeholder that must be re-derived whenever the
solar calibration changes.  A fixed X for every track can be given instead.

File format (our own): a NumPy ``.npz`` holding ``header`` (a JSON string:
format name and version, the grid's settings, the composition rule, the
quantities with units and which are log10, the opacity law's identity and the
SHA-256 of its module's source, the SHA-256 of every module the tracks are
computed with, build costs and failed tracks), ``log_mass`` [n_mass]
(log10 M/M_sun), ``log_z`` [n_Z], ``X0`` [n_Z], ``phase`` [n_phase],
``lifetime`` [n_mass, n_Z] (s, float64), ``table`` [n_mass, n_Z, n_phase,
n_q] (float32: log10 of cgs values for the logarithmic quantities, 7
significant digits, 5e-6 relative at worst, far below the interpolation
error), ``track_steps`` and ``track_cpu_seconds`` [n_mass, n_Z]; since version
2 also ``profiles`` [n_mass, n_Z, n_profile_phase, n_field, n_radius] and
``profile_radius`` [n_radius], the tracks' radial profiles for the profile
bands (:mod:`radwalk.forward.grid_profiles`), and the file is compressed.
Version 1 files (no profiles) are still read.  The age at a
node is phase * lifetime.  Files are named ``trackgrid-<key>.npz`` in the
cache folder (:func:`radwalk.forward.grid.cache_dir`); the key hashes
everything in the header but the build costs, so a change in the solver's or
the opacity law's source gives a new key and a new grid.

Validity: the tracks' (0.5-20 M_sun, Z 1e-4..0.04, X 0.5-0.8, core hydrogen
burning up to X_c = 0.01); outside the grid or past the end of the main
sequence the interpolator returns NaN and a mask, it never extrapolates.
"""

from __future__ import annotations

import ast
import hashlib
import importlib.util
import inspect
import json
import math
import os
import pickle
import time
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from radwalk import constants as const
from radwalk.errors import ConfigError, ModelError
from radwalk.forward import disk_memo, grid_profiles
from radwalk.forward.grid import cache_dir
from radwalk.physics.structure.calibration import CALIBRATED_ALPHA, CALIBRATED_Y0, composition_from_helium
from radwalk.physics.structure.evolution import X_C_END
from radwalk.physics.structure.solver import MASS_RANGE, X_RANGE, Z_RANGE
from radwalk.physics.structure.tracks import NAMES, QUANTITIES, PhaseTrack

__all__ = ["GridSpec", "TrackGrid", "build_grid", "cached_grid", "grid_key", "grid_path", "list_grids",
           "estimate_cpu_seconds", "leave_one_out", "helium_fraction", "solver_sources", "opacity_identity",
           "PRIMORDIAL_HELIUM", "HELIUM_PER_METALS", "FORMAT", "VERSION", "describe", "NAMES", "local_tracks",
           "shipped_path", "SHIPPED_DIR", "DEFAULT_MASS_NODES", "DEFAULT_Z_NODES", "metallicity_from_feh",
           "catalog_ranges", "MeshOpacity", "track_opacity"]

FORMAT = "radwalk-track-grid"
VERSION = 2
READABLE_VERSIONS = (1, 2)  # version 1 files carry no radial profiles (the bands are then solved)

PRIMORDIAL_HELIUM = 0.2471
"""Y_p of standard BBN at the Planck 2018 baryon density (Planck Collaboration 2020, A&A 641, A6; from memory)."""

_SUN_X0, _SUN_Z0 = composition_from_helium(CALIBRATED_Y0)
HELIUM_PER_METALS = (CALIBRATED_Y0 - PRIMORDIAL_HELIUM) / _SUN_Z0
"""dY/dZ from Y_p and the calibrated Sun's initial Y0, Z0 (3.95 today): a placeholder, see the module docstring."""

SECONDS_PER_TRACK = 6.0
"""CPU seconds of one track at dXc = 0.02 and 400 mesh points (measured 4.8-7.9 s over 0.6-8 M_sun on the
development machine; the lower masses take longer).  Used only for the estimate shown before a build."""

DEFAULT_MASS_NODES = (0.6, 0.7, 0.8, 0.9, 0.95, 1.0, 1.05, 1.1, 1.15, 1.2, 1.25, 1.3, 1.35, 1.4, 1.45, 1.5, 1.55,
                      1.6, 1.65, 1.7, 1.75, 1.85, 1.95, 2.0, 2.1, 2.2, 2.3, 2.5, 2.65, 2.8, 3.2, 3.6, 4.0, 4.5, 5.0,
                      5.7, 6.4, 7.2, 8.0)
"""Track masses of the default grid, M_sun: 0.05 M_sun apart over 0.9-1.75 M_sun, where convective cores appear
and then survive to the end of the main sequence (a grid equally spaced in log M missed the interpolation targets
there), 0.02-0.04 dex apart up to 2.8 M_sun, where the overall contraction at the end of the main sequence
changes shape with mass, about 0.05 dex apart above.

Over 1.6-1.9 M_sun more nodes do not help: halving the evolution's step (dXc 0.02 -> 0.01) changes t_MS there by
up to 2.4 % and R at the end of the main sequence by up to 1.6 % (1.80 M_sun, Z = 0.003; 0.3 % at 1.5 and 1.95),
so neighbouring tracks scatter by about the interpolation targets and a node between them (1.8, 1.9 tried) made
the leave-one-out errors larger, not smaller.  The measured errors are in docs/physics.md."""

DEFAULT_Z_NODES = (0.003, 0.0046, 0.0071, 0.011, 0.017, 0.026, 0.04)
"""Metallicities of the default grid: 0.003-0.04 (about [Fe/H] -0.7 to +0.45), 0.19 dex apart."""

_NUMERIC_MODULES = ("radwalk.physics", "radwalk.constants", "radwalk.plugins")

_PREFIX = "trackgrid-"
_SOURCE_ROOT = "radwalk.physics.structure.tracks"  # the modules it imports, transitively, compute the tracks


def helium_fraction(Z):
    """Initial helium Y = Y_p + (dY/dZ) Z of the default composition rule.

    Parameters
    ----------
    Z : float or ndarray
        Metal mass fraction.

    Returns
    -------
    float or ndarray
    """
    return PRIMORDIAL_HELIUM + HELIUM_PER_METALS * np.asarray(Z, dtype=float)


@dataclass(frozen=True)
class GridSpec:
    """What a grid holds and how its tracks are computed.

    Attributes
    ----------
    mass_range : (float, float) or None, M_sun
        Smallest and largest mass; ``n_mass`` masses equally spaced in log M.
        None (and no ``mass_nodes``): the default nodes :data:`DEFAULT_MASS_NODES`.
    n_mass : int or None
        Default 20 with a ``mass_range``.
    z_range : (float, float) or None
        Smallest and largest Z; ``n_z`` values equally spaced in log Z.  None
        (and no ``z_nodes``): :data:`DEFAULT_Z_NODES`.
    n_z : int or None
        Default 6 with a ``z_range``.
    n_phase : int
        Phase points 0..1 per track.
    alpha_mlt : float
        Mixing length (default: the solar calibration's).
    alpha_ov : float
        Step core overshoot, pressure scale heights.
    dXc : float
        Step control of the evolution (largest change of X per step).
    X_end : float
        Central hydrogen fraction that ends the main sequence (phase 1).
    n_mesh : int
        Mesh points of the structure solver.
    profile_phases, profile_radii : int
        Radial profiles kept per track (:mod:`radwalk.forward.grid_profiles`):
        at this many equally spaced phases, on this many points in r/R; 0
        phases keeps none.
    X : float or None
        A fixed initial hydrogen fraction for every track, instead of the
        helium-enrichment rule (then Y = 1 - X - Z).
    mass_nodes, z_nodes : tuple of float or None
        Explicit track masses (M_sun) and metallicities, increasing; they take
        the place of a range.  After construction both always hold the nodes,
        and the ranges and counts describe them.
    """

    mass_range: tuple | None = None
    n_mass: int | None = None
    z_range: tuple | None = None
    n_z: int | None = None
    n_phase: int = 51
    alpha_mlt: float = CALIBRATED_ALPHA
    alpha_ov: float = 0.0
    dXc: float = 0.02
    X_end: float = X_C_END
    n_mesh: int = 400
    profile_phases: int = grid_profiles.DEFAULT_PHASES
    profile_radii: int = grid_profiles.DEFAULT_RADII
    X: float | None = None
    mass_nodes: tuple | None = None
    z_nodes: tuple | None = None

    def __post_init__(self):
        axes = (("mass", "mass_nodes", "mass_range", "n_mass", DEFAULT_MASS_NODES, 20, MASS_RANGE),
                ("Z", "z_nodes", "z_range", "n_z", DEFAULT_Z_NODES, 6, Z_RANGE))
        for name, node_field, range_field, count_field, default_nodes, default_count, (vmin, vmax) in axes:
            nodes, rng, n = getattr(self, node_field), getattr(self, range_field), getattr(self, count_field)
            if nodes is None and rng is None:
                nodes = default_nodes
            if nodes is None:
                lo, hi = (float(v) for v in rng)
                n = default_count if n is None else int(n)
                if not (math.isfinite(lo) and math.isfinite(hi)) or n < 1 or (n == 1) != (lo == hi) or hi < lo:
                    raise ConfigError(f"{n} {name} values over {lo:g}..{hi:g}: give one value for an equal range, "
                                      "at least two over an increasing one")
                nodes = np.geomspace(lo, hi, n) if n > 1 else np.array([lo])
            nodes = tuple(float(v) for v in nodes)
            if not nodes or not all(math.isfinite(v) and v > 0 for v in nodes) or \
                    any(b <= a for a, b in zip(nodes, nodes[1:])):
                raise ConfigError(f"the {name} nodes must be positive, finite and increasing: {nodes}")
            if not (vmin <= nodes[0] and nodes[-1] <= vmax):
                raise ConfigError(f"the {name} range {nodes[0]:g}..{nodes[-1]:g} is outside the solver's "
                                  f"{vmin:g}..{vmax:g}")
            object.__setattr__(self, node_field, nodes)
            object.__setattr__(self, range_field, (nodes[0], nodes[-1]))
            object.__setattr__(self, count_field, len(nodes))
        if self.n_phase < 2:
            raise ConfigError(f"n_phase = {self.n_phase}: a track needs at least 2 phase points")
        if self.profile_phases and (self.profile_phases < 2 or self.profile_radii < 3):
            raise ConfigError(f"profiles at {self.profile_phases} phases on {self.profile_radii} radii: keep at "
                              "least 2 phases and 3 radii, or 0 phases for none")
        for Z in self.metallicities():
            X0 = self.hydrogen(Z)
            if not (X_RANGE[0] <= X0 <= X_RANGE[1]):
                raise ConfigError(f"Z = {Z:.4g} gives X0 = {X0:.4g}, outside the solver's "
                                  f"{X_RANGE[0]:g}..{X_RANGE[1]:g}")

    def masses(self) -> np.ndarray:
        """Masses of the tracks, M_sun, [n_mass]."""
        return np.array(self.mass_nodes)

    def metallicities(self) -> np.ndarray:
        """Metal fractions of the tracks, [n_z]."""
        return np.array(self.z_nodes)

    def restricted(self, mass_range=None, z_range=None, margin: int = 2) -> GridSpec:
        """The same tracks, only those needed to cover a mass and metallicity range.

        Parameters
        ----------
        mass_range : (float, float), optional, M_sun
        z_range : (float, float), optional
        margin : int
            Nodes kept beyond each end of the range, so that the 4-point
            interpolation stencils inside the range are those of the full grid.

        Returns
        -------
        GridSpec
            With explicit node tuples; raises ConfigError for a range that
            does not overlap the grid.
        """
        def cut(nodes, rng, name):
            nodes = np.asarray(nodes)
            if rng is None:
                return tuple(nodes)
            lo, hi = sorted(float(v) for v in rng)
            if hi < nodes[0] or lo > nodes[-1]:
                raise ConfigError(f"the {name} range {lo:g}..{hi:g} is outside the grid's "
                                  f"{nodes[0]:g}..{nodes[-1]:g}")
            i0 = max(int(np.searchsorted(nodes, lo, side="right")) - 1 - margin, 0)
            i1 = min(int(np.searchsorted(nodes, hi, side="left")) + 1 + margin, nodes.size)
            return tuple(float(v) for v in nodes[i0:i1])

        from dataclasses import replace

        return replace(self, mass_nodes=cut(self.masses(), mass_range, "mass"),
                       z_nodes=cut(self.metallicities(), z_range, "Z"))

    def hydrogen(self, Z: float) -> float:
        """Initial X of the tracks at metallicity Z (the fixed X, or 1 - Y(Z) - Z)."""
        if self.X is not None:
            return float(self.X)
        return float(1.0 - helium_fraction(Z) - Z)

    def composition_rule(self) -> dict:
        """The rule as stored in the header."""
        if self.X is not None:
            return {"rule": "fixed X", "X": float(self.X)}
        return {"rule": "Y = Y_p + dY/dZ Z", "Y_p": PRIMORDIAL_HELIUM, "dY_dZ": HELIUM_PER_METALS,
                "Y_p_source": "standard BBN at the Planck 2018 baryon density (from memory)",
                "dY_dZ_source": "calibrated Sun (placeholder, to be re-derived with the calibration)"}

    def evolve_options(self) -> dict:
        return {"alpha_mlt": float(self.alpha_mlt), "alpha_ov": float(self.alpha_ov), "dXc": float(self.dXc),
                "X_end": float(self.X_end), "n_mesh": int(self.n_mesh)}


def estimate_cpu_seconds(spec: GridSpec) -> float:
    """Rough CPU seconds to build ``spec`` (tracks x :data:`SECONDS_PER_TRACK`, scaled by steps and mesh)."""
    return spec.n_mass * spec.n_z * SECONDS_PER_TRACK * (0.02 / spec.dXc) * (spec.n_mesh / 400.0)


# ---------------------------------------------------------------------------- provenance
def _sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _imported_names(path: Path, name: str, is_package: bool) -> set:
    """Absolute names of every module ``path`` imports (lazy imports included), candidates for submodules."""
    tree = ast.parse(path.read_text(), filename=str(path))
    package = name if is_package else name.rpartition(".")[0]
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            out.add(mod)
            out.update(f"{mod}.{a.name}" for a in node.names)
    return out


def solver_sources(root: str = _SOURCE_ROOT) -> dict:
    """SHA-256 of the source of every radwalk module the tracks are computed with.

    Parameters
    ----------
    root : str
        The module whose radwalk imports are followed, transitively (lazy
        imports inside functions included); package ``__init__`` files, which
        only re-export, are neither hashed nor followed.

    Returns
    -------
    dict of str -> str
        Module name -> hex digest, sorted by name, of the modules that compute
        numbers (:data:`_NUMERIC_MODULES`): the host's interfaces and errors
        are followed but not hashed, so editing them does not invalidate grids.
    """
    seen, todo, new = {}, [root], {}
    memo = _import_memo()
    while todo:
        name = todo.pop()
        if name in seen or not name.startswith("radwalk"):
            continue
        try:
            spec = importlib.util.find_spec(name)
        except (ImportError, AttributeError, ValueError):
            spec = None
        if spec is None or not spec.origin or not spec.origin.endswith(".py"):
            seen[name] = None
            continue
        path = Path(spec.origin)
        if path.name == "__init__.py":
            # A package's __init__ only re-exports; following it would pull in the whole program (the top
            # package imports the API, the report, ...) and any edit anywhere would change every grid's key.
            seen[name] = None
            continue
        seen[name] = _sha(path)
        # Parsing is what costs (~0.1 s of CPU per process for the tracks' modules); the names a file imports
        # depend only on its bytes, its name and this scanner, all in the key.
        key = f"{name}:{seen[name]}:{memo['scanner']}"
        names = memo.get(key)
        if names is None:
            names = memo[key] = new[key] = sorted(_imported_names(path, name, False))
        todo.extend(set(names) - set(seen))
    disk_memo.save("imports", new)
    return {k: v for k, v in sorted(seen.items()) if v is not None and k.startswith(_NUMERIC_MODULES)}


_IMPORTS = {}


def _import_memo() -> dict:
    """The imported names of source files already parsed (this process's and the cache folder's)."""
    scanner = _sha(__file__)  # this module holds the scanner: editing it re-parses every file
    if _IMPORTS.get("scanner") != scanner:
        _IMPORTS.clear()
        _IMPORTS.update(disk_memo.load("imports"))
        _IMPORTS["scanner"] = scanner
    return _IMPORTS


def opacity_identity(kappa) -> dict:
    """What identifies an opacity callable: its module, name, the SHA-256 of the module's file and parameters.

    Parameters
    ----------
    kappa : callable
        A plain function ``kappa(rho, T, X, Z)`` or a bound law (an object with
        ``law`` and ``params``, :class:`radwalk.host.components.BoundOpacity`).

    Returns
    -------
    dict
        JSON-ready.  A closure's captured values are not seen: give such a law
        a distinct ``key_extra`` in :func:`cached_grid`.
    """
    law = getattr(kappa, "law", None)
    params = getattr(kappa, "params", None)
    target = law if law is not None else kappa
    obj = target if (inspect.isfunction(target) or inspect.isclass(target)) else type(target)
    module = inspect.getmodule(obj)
    out = {"module": getattr(module, "__name__", None), "name": getattr(obj, "__qualname__", repr(obj))}
    path = getattr(module, "__file__", None)
    out["source_sha256"] = _sha(path) if path and Path(path).is_file() else None
    if out["module"] and out["module"].startswith("radwalk."):
        # a built-in law is a thin adapter: its physics lives in the modules it imports
        out["imports_sha256"] = solver_sources(out["module"])
    if law is not None:
        out["law"] = getattr(law, "name", None)
        out["params"] = {k: float(np.asarray(v, dtype=float).ravel()[0]) for k, v in sorted((params or {}).items())}
        options = getattr(law, "options_key", None)
        if options is not None:
            out["options"] = repr(options)
    return out


def _identity(kappa, spec: GridSpec, key_extra: str = "") -> dict:
    return {"format": FORMAT, "version": VERSION, "spec": _spec_dict(spec),
            "composition_rule": spec.composition_rule(), "opacity": opacity_identity(kappa),
            "sources": solver_sources(), "extra": key_extra}


def _spec_dict(spec: GridSpec) -> dict:
    d = asdict(spec)
    d["mass_range"] = list(spec.mass_range)
    d["z_range"] = list(spec.z_range)
    return d


def grid_key(kappa, spec: GridSpec, key_extra: str = "") -> str:
    """Hex key of the grid for this opacity and spec (changes with any source the tracks use)."""
    return hashlib.sha256(json.dumps(_identity(kappa, spec, key_extra), sort_keys=True).encode()).hexdigest()[:20]


SHIPPED_DIR = Path(__file__).resolve().parent.parent / "data" / "grids"
"""Grids that ship with the package (read only): the default stages' grid, made by ``radwalk grid build``."""


def shipped_path(key: str) -> Path:
    """Where a shipped grid of ``key`` would be."""
    return SHIPPED_DIR / f"{_PREFIX}{key}.npz"


def grid_path(key: str) -> Path:
    """Where the grid of ``key`` lives in the cache folder."""
    return cache_dir() / f"{_PREFIX}{key}.npz"


# ---------------------------------------------------------------------------- interpolation
class _Axis:
    """Lagrange stencils on one axis: weights of the cubic (or lower) polynomial and of linear interpolation.

    Equally spaced axes (the grids as built) find their interval by arithmetic and evaluate the Lagrange
    weights as polynomials in the local coordinate; others (a grid with a track left out) search and use
    the product form.
    """

    def __init__(self, nodes, order=4):
        self.nodes = np.asarray(nodes, dtype=float)
        n = self.nodes.size
        if n > 1 and np.any(np.diff(self.nodes) <= 0):
            raise ConfigError("grid axis nodes must increase")
        self.n = n
        self.s = min(order, n)
        self.tol = 1e-9 * max(self.nodes[-1] - self.nodes[0], 1.0)
        self.offsets = np.arange(self.s)
        self.lo, self.hi = float(self.nodes[0]), float(self.nodes[-1])
        if n == 1:
            return
        step = np.diff(self.nodes)
        self.uniform = bool(np.allclose(step, step[0], rtol=1e-9, atol=0.0))
        self.step = float(step[0])
        starts = np.arange(n - self.s + 1)
        xs = self.nodes[starts[:, None] + self.offsets]  # [n_starts, s]
        den = np.ones_like(xs)
        for j in range(self.s):
            for k in range(self.s):
                if k != j:
                    den[:, j] *= xs[:, j] - xs[:, k]
        self.inv_den = 1.0 / den
        # Uniform nodes 0..s-1: w_j(t) = prod_{k != j} (t - k) / (j - k) as polynomial coefficients [power, j].
        coef = np.zeros((self.s, self.s))
        for j in range(self.s):
            poly = np.array([1.0])
            for k in range(self.s):
                if k != j:
                    poly = np.convolve(poly, [1.0, -k]) / (j - k)
            coef[:, j] = poly[::-1]
        self.coef = coef
        self.powers = np.arange(self.s)

    def locate(self, x):
        """(start [n], smooth weights [n, s], linear weights [n, s], inside [n]) for points x [n]."""
        inside = (x >= self.lo - self.tol) & (x <= self.hi + self.tol)
        m = x.size
        if self.n == 1:
            w = np.ones((m, 1))
            return np.zeros(m, dtype=np.intp), w, w, inside
        xc = np.fmin(np.fmax(x, self.lo), self.hi)  # fmax/fmin skip NaN: a NaN point indexes node 0
        if self.uniform:
            u = (xc - self.lo) * (1.0 / self.step)
            i = np.minimum(u.astype(np.intp), self.n - 2)
        else:
            i = np.minimum(np.searchsorted(self.nodes, xc, side="right") - 1, self.n - 2)
            u = i + (xc - self.nodes[i]) / (self.nodes[i + 1] - self.nodes[i])
        start = np.minimum(np.maximum(i - (self.s - 2) // 2, 0), self.n - self.s)
        t = (u - start)[:, None]  # position in the stencil, in node units
        if self.uniform:
            w = (t ** self.powers) @ self.coef
        else:
            d = xc[:, None] - self.nodes[start[:, None] + self.offsets]  # [n, s]
            left = np.ones_like(d)
            right = np.ones_like(d)
            left[:, 1:] = np.cumprod(d[:, :-1], axis=1)
            right[:, :-1] = np.cumprod(d[:, :0:-1], axis=1)[:, ::-1]
            w = left * right * self.inv_den[start]
        lin = np.maximum(0.0, 1.0 - np.abs(t - self.offsets))  # hat functions: linear interpolation
        return start, w, lin, inside


def _samples(M, Z, age):
    """M [n] and Z, age broadcast to it (scalars or arrays), as float arrays; and n."""
    M = np.asarray(M, dtype=float).reshape(-1)
    n = M.size
    Z = np.broadcast_to(np.asarray(Z, dtype=float).reshape(-1), (n,)) if np.ndim(Z) else np.full(n, float(Z))
    age = (np.broadcast_to(np.asarray(age, dtype=float).reshape(-1), (n,)) if np.ndim(age)
           else np.full(n, float(age)))
    return M, Z, age, n


def _on_main_sequence(in_mz, life, age, phase):
    """Inside the grid's (M, Z) range with a computed lifetime, and 0 <= age <= t_MS, bool [n]."""
    return in_mz & np.isfinite(life) & (age >= 0.0) & (phase <= 1.0 + 1e-9)


class TrackGrid:
    """Tracks on (log M, log Z, phase) and the interpolator of every stored quantity at (M, Z, age).

    Parameters
    ----------
    log_mass : ndarray [n_mass]
        log10 M / M_sun of the tracks, increasing.
    log_z : ndarray [n_z]
        log10 Z, increasing.
    phase : ndarray [n_phase]
        Equally spaced, 0..1.
    lifetime : ndarray [n_mass, n_z], s
        Main-sequence lifetimes (NaN for a failed track).
    table : ndarray [n_mass, n_z, n_phase, n_quantities]
        Stored values (log10 of cgs for the logarithmic quantities).
    header : dict
        Provenance (see the module docstring).
    X0 : ndarray [n_z], optional
        Initial hydrogen of the tracks.
    track_steps, track_cpu_seconds : ndarray [n_mass, n_z], optional
    profiles : ndarray [n_mass, n_z, n_profile_phase, n_field, n_radius], optional
        Radial profiles of the tracks (:mod:`radwalk.forward.grid_profiles`); None for a grid without.
    """

    def __init__(self, log_mass, log_z, phase, lifetime, table, header, X0=None, track_steps=None,
                 track_cpu_seconds=None, profiles=None):
        self.log_mass = np.asarray(log_mass, dtype=float)
        self.log_z = np.asarray(log_z, dtype=float)
        self.phase = np.asarray(phase, dtype=float)
        self.lifetime = np.asarray(lifetime, dtype=float)
        self.table = np.asarray(table, dtype=np.float32)
        self.header = dict(header)
        nm, nz, npz = self.log_mass.size, self.log_z.size, self.phase.size
        self.names = tuple(q["name"] for q in self.header["quantities"])
        if self.table.shape != (nm, nz, npz, len(self.names)) or self.lifetime.shape != (nm, nz):
            raise ConfigError(f"grid arrays do not match: table {self.table.shape}, lifetime {self.lifetime.shape}, "
                              f"axes {nm} x {nz} x {npz}, {len(self.names)} quantities")
        if npz < 2 or not np.allclose(self.phase, np.linspace(0.0, 1.0, npz), rtol=0.0, atol=1e-12):
            raise ConfigError("the phase axis must be equally spaced from 0 to 1")
        self.X0 = None if X0 is None else np.asarray(X0, dtype=float)
        self.track_steps = track_steps
        self.track_cpu_seconds = track_cpu_seconds
        self.profiles = None if profiles is None else np.asarray(profiles, dtype=np.float32)
        nf = len(grid_profiles.FIELDS)
        if self.profiles is not None and (self.profiles.ndim != 5 or self.profiles.shape[:2] != (nm, nz)
                                          or self.profiles.shape[3] != nf or self.profiles.shape[2] < 2):
            raise ConfigError(f"grid profiles {self.profiles.shape} do not match the axes {nm} x {nz} and the "
                              f"{nf} profile fields")
        self._m = _Axis(self.log_mass)
        self._z = _Axis(self.log_z)
        self._log = np.array([q["log10"] for q in self.header["quantities"]], dtype=bool)
        self._flat = self.table.reshape(-1, len(self.names))
        with np.errstate(divide="ignore", invalid="ignore"):
            self._log_life = np.log10(self.lifetime).ravel()
        sm, sz = self._m.s, self._z.s
        self._off_mz = (np.arange(sm)[:, None] * nz + np.arange(sz)[None, :]).ravel()
        self._off = (np.arange(sm)[:, None, None] * nz * npz + np.arange(sz)[None, :, None] * npz
                     + np.arange(2)[None, None, :]).ravel()

    @property
    def shape(self) -> tuple:
        """(n_mass, n_z, n_phase)."""
        return self.table.shape[:3]

    @property
    def key(self) -> str:
        return self.header.get("key", "")

    # ------------------------------------------------------------------ interpolation
    def __call__(self, M, Z, age):
        """Every stored quantity at (M, Z, age), vectorised over samples.

        Parameters
        ----------
        M : array_like [n], g
        Z : array_like [n] (or scalar)
        age : array_like [n] (or scalar), s
            Age since the zero-age main sequence.

        Returns
        -------
        values : dict of str -> ndarray [n]
            Each stored quantity in cgs (as :data:`radwalk.physics.structure.tracks.QUANTITIES`),
            plus ``age`` (s, the input), ``phase`` and ``main_sequence_lifetime`` (s).  NaN where
            ``inside`` is False.
        inside : ndarray [n] of bool
            Within the grid's mass and metallicity range, 0 <= age <= t_MS(M, Z), and every track the
            interpolation uses was computed.  Never raises for points outside.
        """
        M, Z, age, n = _samples(M, Z, age)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            return self._interpolate(M, Z, age, n)

    def _lifetimes(self, M, Z, n):
        """Stencils in (log M, log Z) and the interpolated lifetime t_MS, s, [n]."""
        im, wm, lm_w, in_m = self._m.locate(np.log10(M / const.M_SUN))
        iz, wz, lz_w, in_z = self._z.locate(np.log10(Z))
        wc = (wm[:, :, None] * wz[:, None, :]).reshape(n, -1)  # [n, sm * sz]
        life_nodes = self._log_life[(im * self.shape[1] + iz)[:, None] + self._off_mz]
        life = 10.0 ** np.einsum("nk,nk->n", wc, life_nodes)
        return im, iz, wc, lm_w, lz_w, in_m & in_z, life

    def _interpolate(self, M, Z, age, n):
        im, iz, wc, lm_w, lz_w, in_mz, life = self._lifetimes(M, Z, n)
        nz, npz = self.shape[1], self.shape[2]
        phase = age / life
        inside = _on_main_sequence(in_mz, life, age, phase)
        u = np.fmin(np.fmax(phase, 0.0), 1.0) * (npz - 1)
        ip = np.minimum(u.astype(np.intp), npz - 2)
        fp = u - ip
        wp = np.stack([1.0 - fp, fp], axis=1)  # [n, 2]
        rows = self._flat[((im * nz + iz) * npz + ip)[:, None] + self._off]  # [n, sm * sz * 2, q]
        wl = (lm_w[:, :, None] * lz_w[:, None, :]).reshape(n, -1)
        w = (np.stack([wc, wl], axis=1)[:, :, :, None] * wp[:, None, None, :]).reshape(n, 2, -1)
        both = w @ rows  # [n, (smooth, linear), q]
        vals = np.where(self._log, 10.0 ** both[:, 0], both[:, 1])
        vals[~inside] = np.nan
        out = {name: vals[:, k] for k, name in enumerate(self.names)}
        nan = np.where(inside, 0.0, np.nan)
        out["age"] = age + nan
        out["phase"] = phase + nan
        out["main_sequence_lifetime"] = life + nan
        return out, inside

    @property
    def has_profiles(self) -> bool:
        """Whether the grid carries radial profiles (grid files of version 1 do not)."""
        return self.profiles is not None

    def profiles_at(self, M, Z, age):
        """Radial profiles at (M, Z, age), linear in log M, log Z and phase (:mod:`radwalk.forward.grid_profiles`).

        Parameters
        ----------
        M : array_like [n], g
        Z, age : array_like [n] (or scalar); age in s since the zero-age main sequence

        Returns
        -------
        r_rel : ndarray [n_radius]
            r/R of the profile points.
        fields : dict of str -> ndarray [n, n_radius]
            :data:`radwalk.forward.grid_profiles.FIELDS` in cgs, ``convective`` 0/1 and
            ``mean_free_path`` (cm); NaN for samples outside (as :meth:`__call__`'s ``inside``).

        Raises
        ------
        ConfigError
            The grid carries no profiles (:attr:`has_profiles`).
        """
        if self.profiles is None:
            raise ConfigError("this track grid carries no radial profiles (a grid file of version 1): "
                              "rebuild it with `radwalk grid build`")
        M, Z, age, n = _samples(M, Z, age)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            *_, in_mz, life = self._lifetimes(M, Z, n)
            phase = age / life
            inside = _on_main_sequence(in_mz, life, age, phase)
            lm, lz = np.log10(M / const.M_SUN), np.log10(Z)
            safe = np.where(inside, 1.0, np.nan)
            fields = grid_profiles.interpolate(self.profiles, self.log_mass, self.log_z, np.where(inside, lm, 0.0),
                                               np.where(inside, lz, 0.0), np.where(inside, phase, 0.0))
        fields = {name: v * safe[:, None] for name, v in fields.items()}
        return grid_profiles.radius_nodes(self.profiles.shape[4]), fields

    def lifetime_at(self, M, Z):
        """Interpolated main-sequence lifetime t_MS(M, Z), s, [n] (NaN outside the grid).

        Only the lifetime is interpolated (the support check and the age prior call this on every posterior
        evaluation, beside the relation's full interpolation).
        """
        M, Z, _, n = _samples(M, Z, 0.0)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            *_, in_mz, life = self._lifetimes(M, Z, n)
        return np.where(in_mz & np.isfinite(life), life, np.nan)

    # ------------------------------------------------------------------ pieces and files
    def node(self, i: int, j: int) -> dict:
        """The stored values of track (i, j) at every phase, cgs, each [n_phase]; plus ``age``."""
        out = {}
        for k, name in enumerate(self.names):
            v = self.table[i, j, :, k].astype(float)
            out[name] = 10.0 ** v if self._log[k] else v
        out["age"] = self.phase * self.lifetime[i, j]
        return out

    def without(self, axis: str, index: int) -> TrackGrid:
        """The same grid with one mass (``axis="mass"``) or metallicity (``"z"``) node left out."""
        ax = {"mass": 0, "z": 1}[axis]
        lm = np.delete(self.log_mass, index) if ax == 0 else self.log_mass
        lz = np.delete(self.log_z, index) if ax == 1 else self.log_z
        X0 = None if self.X0 is None or ax == 0 else np.delete(self.X0, index)
        prof = None if self.profiles is None else np.delete(self.profiles, index, axis=ax)
        return TrackGrid(lm, lz, self.phase, np.delete(self.lifetime, index, axis=ax),
                         np.delete(self.table, index, axis=ax), self.header, X0=X0, profiles=prof)

    def save(self, path) -> Path:
        """Write the grid (atomically: a temporary file renamed into place)."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
        arrays = dict(header=np.array(json.dumps(self.header, sort_keys=True, allow_nan=False)),
                      log_mass=self.log_mass, log_z=self.log_z, phase=self.phase, lifetime=self.lifetime,
                      table=self.table)
        for name in ("X0", "track_steps", "track_cpu_seconds", "profiles"):
            if getattr(self, name) is not None:
                arrays[name] = np.asarray(getattr(self, name))
        if self.profiles is not None:
            arrays["profile_radius"] = grid_profiles.radius_nodes(self.profiles.shape[4])
        with open(tmp, "wb") as fh:
            # Compressed: the profiles are most of the file (about 6 MB raw for the default grid).
            np.savez_compressed(fh, **arrays)
        os.replace(tmp, path)
        return path

    @classmethod
    def load(cls, path) -> TrackGrid:
        """Read a grid file (no pickled objects are read)."""
        with np.load(Path(path), allow_pickle=False) as f:
            header = json.loads(str(f["header"]))
            if header.get("format") != FORMAT or header.get("version") not in READABLE_VERSIONS:
                raise ConfigError(f"{path}: not a {FORMAT} file of version "
                                  f"{' or '.join(str(v) for v in READABLE_VERSIONS)}")
            opt = {k: f[k] for k in ("X0", "track_steps", "track_cpu_seconds", "profiles") if k in f.files}
            return cls(f["log_mass"], f["log_z"], f["phase"], f["lifetime"], f["table"], header, **opt)


# ---------------------------------------------------------------------------- building
def _one_track(M, X0, Z, kappa, options: dict, n_phase: int, profile_shape=(0, 0)) -> PhaseTrack:
    """Evolve and resample one track; a zero-age model that fails from a polytrope is reached by continuation.

    ``profile_shape`` (phases, radii): the track's radial profiles to keep, set as the attribute ``profiles``
    of the returned track (:func:`radwalk.forward.grid_profiles.track_profiles`); (0, 0) keeps none."""
    from radwalk.physics.structure.evolution import evolve
    from radwalk.physics.structure.solver import solve_masses, solve_star
    from radwalk.physics.structure.tracks import phase_nodes, resample

    t0 = time.process_time()
    opts = dict(options)
    X_end = opts.pop("X_end")
    phase = phase_nodes(n_phase)
    try:
        try:
            track = evolve(M, X0, Z, kappa, X_end=X_end, **opts)
        except ModelError:
            # From a solved 1 M_sun star by steps in mass (the polytrope start fails at some corners).
            solve = dict(alpha_mlt=opts["alpha_mlt"], n_mesh=opts["n_mesh"])
            start = solve_star(const.M_SUN, X0, Z, kappa, **solve)
            zams = solve_masses([M], X0, Z, kappa, start=start, **solve)[0]
            track = evolve(M, X0, Z, kappa, X_end=X_end, start=zams, **opts)
    except ModelError as exc:
        out = PhaseTrack(M=M, X0=X0, Z=Z, phase=phase, lifetime=math.nan,
                         values=np.full((phase.size, len(QUANTITIES)), np.nan), X_end=X_end, n_steps=0,
                         stop_reason=f"zero-age model not solved: {exc}", cpu_seconds=time.process_time() - t0)
        if profile_shape[0]:
            out.profiles = grid_profiles.missing_profiles(*profile_shape)
        return out
    out = resample(track, phase, X_end)
    if profile_shape[0]:
        out.profiles = grid_profiles.track_profiles(track, *profile_shape, X_end=X_end)
    out.cpu_seconds = time.process_time() - t0
    return out


def _picklable(obj) -> bool:
    try:
        pickle.dumps(obj)
        return True
    except Exception:  # noqa: BLE001 - any failure means the pool cannot carry it
        return False


def local_tracks(fn, tasks, workers: int):
    """Run ``fn(*args)`` for every ``(key, args)`` of ``tasks`` on a spawned local process pool.

    Yields ``(key, result)`` as tracks finish (in any order).  The default
    runner of :func:`build_grid`; :func:`radwalk.run.executors.dask_tracks`
    runs the same tasks on a Dask cluster.
    """
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from multiprocessing import get_context

    if workers <= 1 or len(tasks) <= 1:
        for key, args in tasks:
            yield key, fn(*args)
        return
    with ProcessPoolExecutor(max_workers=min(workers, len(tasks)), mp_context=get_context("spawn")) as pool:
        futures = {pool.submit(fn, *args): key for key, args in tasks}
        for fut in as_completed(futures):
            yield futures[fut], fut.result()


def build_grid(kappa, spec: GridSpec | None = None, *, workers: int | None = None, progress: bool = True,
               key_extra: str = "", runner=None) -> TrackGrid:
    """Compute every track of ``spec`` and assemble the grid (not saved; see :func:`cached_grid`).

    Parameters
    ----------
    kappa : callable
        Opacity ``kappa(rho, T, X, Z)`` in cm^2/g.  With ``workers > 1`` it is
        sent to spawned processes, so it must pickle (a module-level function
        or a bound law of an importable module); otherwise the tracks are
        computed here, one after another, with a warning.
    spec : GridSpec
    workers : int, optional
        Processes of the local pool (default: the machine's cores); 1 computes
        the tracks in this process.
    progress : bool
        Show a tqdm progress bar (on stderr).
    key_extra : str
        Added to the grid's identity (for opacity closures whose captured values
        the source hash cannot see).
    runner : callable, optional
        ``runner(fn, tasks, workers)`` yielding ``(key, fn(*args))`` for every
        ``(key, args)`` in ``tasks`` as they finish; default
        :func:`local_tracks` (a spawned process pool).  A Dask cluster:
        :func:`radwalk.run.executors.dask_tracks`.

    Returns
    -------
    TrackGrid
        Tracks that failed are NaN (their reasons in ``header["build"]["failed"]``).
    """
    import warnings

    from tqdm import tqdm

    spec = spec or GridSpec()
    workers = int(workers or os.cpu_count() or 1)
    masses, metals = spec.masses(), spec.metallicities()
    tasks = [(i, j, float(masses[i] * const.M_SUN), spec.hydrogen(metals[j]), float(metals[j]))
             for i in range(masses.size) for j in range(metals.size)]
    options = spec.evolve_options()
    if workers > 1 and len(tasks) > 1 and not _picklable(kappa):
        warnings.warn("the opacity law cannot be sent to worker processes (it does not pickle); "
                      "computing the tracks in this process", stacklevel=2)
        workers = 1
    t_wall = time.perf_counter()
    results = {}
    runner = runner or local_tracks
    shape = (spec.profile_phases, spec.profile_radii) if spec.profile_phases else (0, 0)
    jobs = [((i, j), (M, X0, Z, kappa, options, spec.n_phase, shape)) for i, j, M, X0, Z in tasks]
    bar = tqdm(total=len(tasks), disable=not progress, desc="tracks", unit="track")
    try:
        for key, track in runner(_one_track, jobs, workers):
            results[key] = track
            bar.update()
    finally:
        bar.close()
    wall = time.perf_counter() - t_wall
    return _assemble(spec, kappa, results, key_extra, wall, workers)


def _assemble(spec, kappa, results, key_extra, wall, workers) -> TrackGrid:
    masses, metals = spec.masses(), spec.metallicities()
    nm, nz = masses.size, metals.size
    nq = len(QUANTITIES)
    log = np.array([q.log for q in QUANTITIES])
    table = np.full((nm, nz, spec.n_phase, nq), np.nan, dtype=np.float32)
    lifetime = np.full((nm, nz), np.nan)
    steps = np.zeros((nm, nz), dtype=np.int32)
    cpu = np.zeros((nm, nz))
    profiles = None
    if spec.profile_phases:
        profiles = np.full((nm, nz, spec.profile_phases, len(grid_profiles.FIELDS), spec.profile_radii), np.nan,
                           dtype=np.float32)
    failed = []
    for (i, j), pt in results.items():
        if profiles is not None:
            profiles[i, j] = pt.profiles
        with np.errstate(divide="ignore", invalid="ignore"):
            table[i, j] = np.where(log, np.log10(pt.values), pt.values)
        lifetime[i, j] = pt.lifetime
        steps[i, j] = pt.n_steps
        cpu[i, j] = pt.cpu_seconds
        if not math.isfinite(pt.lifetime):
            failed.append({"mass_msun": float(masses[i]), "Z": float(metals[j]), "reason": pt.stop_reason})
    identity = _identity(kappa, spec, key_extra)
    header = dict(identity)
    header["key"] = hashlib.sha256(json.dumps(identity, sort_keys=True).encode()).hexdigest()[:20]
    header["quantities"] = [{"name": q.name, "unit": q.unit, "log10": q.log, "description": q.description}
                            for q in QUANTITIES]
    if profiles is not None:
        header["profiles"] = {
            "fields": [{"name": f.name, "unit": f.unit, "log10": f.log, "description": f.description}
                       for f in grid_profiles.FIELDS],
            "phases": "equally spaced 0..1", "radius": "r/R = sin(pi s / 2), s equally spaced 0..1",
            "interpolation": "linear in age between a track's steps, in log M, log Z and phase between tracks"}
    header["created"] = time.strftime("%Y-%m-%dT%H:%M:%S%z")
    header["build"] = {"tracks": nm * nz, "cpu_seconds": float(cpu.sum()), "wall_seconds": float(wall),
                       "workers": int(workers), "failed": failed}
    X0 = np.array([spec.hydrogen(Z) for Z in metals])
    return TrackGrid(np.log10(masses), np.log10(metals), np.linspace(0.0, 1.0, spec.n_phase), lifetime, table,
                     header, X0=X0, track_steps=steps, track_cpu_seconds=cpu, profiles=profiles)


def cached_grid(kappa, spec: GridSpec | None = None, *, build: bool = True, workers: int | None = None,
                progress: bool = True, key_extra: str = "", runner=None) -> TrackGrid | None:
    """The grid for this opacity and spec from the cache folder, built and saved first if missing.

    Parameters
    ----------
    kappa, spec, workers, progress, key_extra
        As :func:`build_grid`.
    build : bool
        If False, return None instead of building a missing grid.

    Returns
    -------
    TrackGrid or None
        The package's shipped grid (:data:`SHIPPED_DIR`) when its key matches,
        else the cache folder's.  A file that cannot be read counts as missing.
        A cache folder that cannot be written only costs building again next time.
    """
    spec = spec or GridSpec()
    key = grid_key(kappa, spec, key_extra)
    path = grid_path(key)
    for candidate in (shipped_path(key), path):
        if candidate.is_file():
            try:
                return TrackGrid.load(candidate)
            except (OSError, ValueError, KeyError, ConfigError):
                pass
    if not build:
        return None
    grid = build_grid(kappa, spec, workers=workers, progress=progress, key_extra=key_extra, runner=runner)
    try:
        grid.save(path)
    except OSError:
        pass
    return grid


def list_grids(folder=None) -> list[dict]:
    """Headers of the grid files in the cache folder and the shipped ones (each with ``path``, ``size_bytes``,
    ``shipped``), newest first; ``folder`` lists that folder only."""
    folders = [Path(folder)] if folder is not None else [cache_dir(), SHIPPED_DIR]
    paths = [p for f in folders for p in f.glob(f"{_PREFIX}*.npz")]
    out = []
    for path in sorted(paths, key=lambda p: p.stat().st_mtime, reverse=True):
        try:
            with np.load(path, allow_pickle=False) as f:
                header = json.loads(str(f["header"]))
        except (OSError, ValueError, KeyError):
            header = {"unreadable": True}
        header["path"] = str(path)
        header["size_bytes"] = path.stat().st_size
        header["shipped"] = path.parent == SHIPPED_DIR
        out.append(header)
    return out


# ---------------------------------------------------------------------------- accuracy
def leave_one_out(grid: TrackGrid, axis: str = "mass") -> dict:
    """Interpolation errors at tracks left out of the grid one at a time.

    Each interior node of ``axis`` ("mass" or "z") is removed in turn; the
    grid without it is asked for the left-out tracks' stars at their own
    (M, Z, age = phase t_MS), and the answer compared with the track.

    Returns
    -------
    dict
        ``errors``: per quantity an ndarray [n_left_out, n_other, n_phase] —
        dex for luminosity, teff, central_temperature, central_density;
        relative for radius and the timescales; absolute for the fractions;
        plus ``main_sequence_lifetime`` (relative, [n_left_out, n_other]);
        ``summary``: per quantity the largest and the rms error over all
        points inside; ``outside``: points the smaller grid called outside
        (a lifetime interpolated shorter than the true one makes the last
        phases fall past the end).
    """
    ax = {"mass": 0, "z": 1}[axis]
    n_axis = grid.shape[ax]
    if n_axis < 3:
        raise ConfigError(f"leave-one-out along {axis} needs at least 3 nodes, the grid has {n_axis}")
    dex = {"luminosity", "teff", "central_temperature", "central_density", "central_pressure"}
    errors = {name: [] for name in grid.names}
    errors["main_sequence_lifetime"] = []
    outside = 0
    n_phase = grid.shape[2]
    for k in range(1, n_axis - 1):
        sub = grid.without(axis, k)
        per = {name: [] for name in errors}
        for other in range(grid.shape[1 - ax]):
            i, j = (k, other) if ax == 0 else (other, k)
            truth = grid.node(i, j)
            M = np.full(n_phase, 10.0 ** grid.log_mass[i] * const.M_SUN)
            Z = np.full(n_phase, 10.0 ** grid.log_z[j])
            got, inside = sub(M, Z, truth["age"])
            outside += int(np.sum(~inside & np.isfinite(truth["age"])))
            life = sub.lifetime_at(M[:1], Z[:1])[0]
            per["main_sequence_lifetime"].append(life / grid.lifetime[i, j] - 1.0)
            for name in grid.names:
                a, b = got[name], truth[name]
                with np.errstate(divide="ignore", invalid="ignore"):
                    if name in dex:
                        e = np.log10(a) - np.log10(b)
                    elif grid._log[grid.names.index(name)]:
                        e = a / b - 1.0
                    else:
                        e = a - b
                per[name].append(e)
        for name in errors:
            errors[name].append(per[name])
    errors = {name: np.array(v, dtype=float) for name, v in errors.items()}
    summary = {}
    for name, e in errors.items():
        finite = e[np.isfinite(e)]
        summary[name] = {"max": float(np.max(np.abs(finite))) if finite.size else math.nan,
                         "rms": float(np.sqrt(np.mean(finite ** 2))) if finite.size else math.nan,
                         "points": int(finite.size)}
    return {"axis": axis, "errors": errors, "summary": summary, "outside": outside}


def describe(header: dict) -> str:
    """A few lines about a grid from its header (for `radwalk grid list|info`)."""
    spec = header.get("spec", {})
    build = header.get("build", {})
    opac = header.get("opacity", {})
    rule = header.get("composition_rule", {})
    comp = (f"X = {rule['X']:g}" if rule.get("rule") == "fixed X"
            else f"Y = {rule.get('Y_p', math.nan):.4g} + {rule.get('dY_dZ', math.nan):.3g} Z")
    lines = [
        f"key {header.get('key', '?')}  ({header.get('size_bytes', 0) / 1e6:.2f} MB, "
        f"created {header.get('created', '?')})",
        f"  mass {spec.get('mass_range', ['?', '?'])[0]}..{spec.get('mass_range', ['?', '?'])[1]} M_sun "
        f"x {spec.get('n_mass')}, Z {spec.get('z_range', ['?', '?'])[0]}..{spec.get('z_range', ['?', '?'])[1]} "
        f"x {spec.get('n_z')}, {spec.get('n_phase')} phases; {comp}",
        f"  alpha_mlt {spec.get('alpha_mlt')}, overshoot {spec.get('alpha_ov')}, dXc {spec.get('dXc')}, "
        f"ends at X_c = {spec.get('X_end')}, {spec.get('n_mesh')} mesh points",
        f"  opacity {opac.get('law') or opac.get('name')} ({opac.get('module')})",
        (f"  radial profiles at {spec.get('profile_phases')} phases on {spec.get('profile_radii')} points in r/R"
         if header.get("profiles") else "  no radial profiles (the profile bands are solved)"),
        f"  built with {build.get('workers')} workers: {build.get('cpu_seconds', math.nan):.0f} s CPU, "
        f"{build.get('wall_seconds', math.nan):.0f} s wall; {len(build.get('failed', []))} failed tracks",
    ]
    return "\n".join(lines)


# ---------------------------------------------------------------------------- a catalog's part of the grid
MASS_LUMINOSITY_POWER = 3.5
"""L ~ M^3.5 on the main sequence (common practice, no source): only to pick which tracks a catalog needs."""

LUMINOSITY_SLACK = 3.0
"""Factor on either side of a catalog's luminosities: a star brightens ~2x over its main-sequence life at
1 M_sun and the power law is rough; two extra nodes on each side are kept on top (:meth:`GridSpec.restricted`)."""


def metallicity_from_feh(feh, spec: GridSpec | None = None, solar_z_over_x: float = const.Z_SUN / const.X_SUN):
    """Z of a star with [Fe/H] under the spec's composition rule (scaled-solar: [Fe/H] = [Z/X]).

    Parameters
    ----------
    feh : float or ndarray, dex
    spec : GridSpec, optional
        Its composition rule (Y = Y_p + dY/dZ Z, or a fixed X).
    solar_z_over_x : float
        (Z/X) of the Sun (default: radwalk's reference composition).

    Returns
    -------
    float or ndarray
    """
    spec = spec or GridSpec(mass_nodes=(1.0,), z_nodes=(Z_SUN_NODE,))
    zx = solar_z_over_x * 10.0 ** np.asarray(feh, dtype=float)
    if spec.X is not None:
        return zx * spec.X
    # X = 1 - Y_p - (1 + dY/dZ) Z and Z = zx X  =>  Z = zx (1 - Y_p) / (1 + zx (1 + dY/dZ))
    return zx * (1.0 - PRIMORDIAL_HELIUM) / (1.0 + zx * (1.0 + HELIUM_PER_METALS))


Z_SUN_NODE = 0.017  # a node of the default Z axis, for a throw-away spec that only carries the composition rule


def catalog_ranges(luminosity_lsun, feh=None, spec: GridSpec | None = None) -> tuple:
    """Mass and metallicity ranges a catalog's main-sequence stars can need.

    Parameters
    ----------
    luminosity_lsun : array_like [n], L_sun
        Measured luminosities (NaN ignored).
    feh : array_like [n, 2] or None, dex
        [Fe/H] and its error per star (rows of NaN ignored); None, or no
        finite row: the whole Z axis.
    spec : GridSpec, optional
        The grid to cut (default: the default grid), for its composition rule and nodes.

    Returns
    -------
    mass_range : (float, float), M_sun
        (L_min / 3)^(1/3.5) .. (3 L_max)^(1/3.5), clipped to the grid.
    z_range : (float, float) or None
        Z of [Fe/H] -+ 3 sigma over the stars, or None for the whole axis.
    """
    spec = spec or GridSpec()
    L = np.asarray(luminosity_lsun, dtype=float)
    L = L[np.isfinite(L) & (L > 0)]
    if L.size == 0:
        raise ConfigError("no star of the catalog has a luminosity: the mass range of its grid cannot be chosen")
    lo = (L.min() / LUMINOSITY_SLACK) ** (1.0 / MASS_LUMINOSITY_POWER)
    hi = (L.max() * LUMINOSITY_SLACK) ** (1.0 / MASS_LUMINOSITY_POWER)
    m = spec.masses()
    mass_range = (float(np.clip(lo, m[0], m[-1])), float(np.clip(hi, m[0], m[-1])))
    z_range = None
    if feh is not None:
        f = np.asarray(feh, dtype=float).reshape(-1, 2)
        f = f[np.all(np.isfinite(f), axis=1)]
        if f.size:
            zs = metallicity_from_feh(np.array([(f[:, 0] - 3 * f[:, 1]).min(), (f[:, 0] + 3 * f[:, 1]).max()]), spec)
            z = spec.metallicities()
            z_range = (float(np.clip(zs[0], z[0], z[-1])), float(np.clip(zs[1], z[0], z[-1])))
    return mass_range, z_range


class MeshOpacity:
    """An opacity law with fixed parameters, called on one star's mesh as it comes.

    The track builder calls the opacity on one star's arrays (rho, T [k, g] with X [g]), which a
    :class:`radwalk.host.components.BoundOpacity` would lift against a sample axis.  This keeps the law and its
    parameters as attributes, so a grid's key (:func:`opacity_identity`) is the bound law's, and it pickles for
    the builder's worker processes.

    Parameters
    ----------
    law : OpacityLaw
    params : dict
        The law's parameters (one value each; a per-sample array gives its first value).
    """

    def __init__(self, law, params: dict):
        self.law = law
        self.params = {name: float(np.asarray(v, dtype=float).ravel()[0]) for name, v in params.items()}

    def __call__(self, rho, T, X, Z):
        return self.law.kappa(rho, T, X, Z, **self.params)


def track_opacity(opacity):
    """The opacity as the track builder calls it: a bound law becomes a :class:`MeshOpacity`, a function stays."""
    law, params = getattr(opacity, "law", None), getattr(opacity, "params", None)
    return opacity if law is None or params is None else MeshOpacity(law, params)
