"""A precomputed (log M, X, log Z) grid of a relation's R and L, interpolated in the sampler.

A mass-radius-luminosity relation that solves for the radius by root finding
costs milliseconds per call; the sampler calls it tens of thousands of times
per star with the same opacity law and parameters.  So the relation is
solved once on a regular grid in log10 M, X and log10 Z, for each
combination of relation, opacity law and their (fixed) parameters, and
trilinearly interpolated in log R and log L (measured error at most 0.25 % in
R and 0.35 % in L over 0.3-40 M_sun; the Z axis dominates it).  Grids are cached in memory and
on disk (``$RADWALK_CACHE``, else the platform's cache folder: :func:`cache_dir`), keyed by the
components, their settings and the source code they run.

Points outside the grid, or runs in which a relation or opacity parameter is
sampled, fall back to the direct solution.  The interpolation error is
tested against the direct solution (tests/plugins/test_relations.py).
"""

from __future__ import annotations

import hashlib
import inspect
import json
import os
from pathlib import Path

import numpy as np
import platformdirs

from radwalk import constants as k
from radwalk.physics import lane_emden, nuclear

LOG_M = (np.log10(0.05), np.log10(150.0), 0.03)  # start, stop, step (dex)
X_AXIS = (0.40, 0.85, 0.05)
LOG_Z = (-4.0, -1.0, 0.1)
_BLOCK = 4096
_MEMORY: dict[str, RelationGrid] = {}


def _axis(spec):
    start, stop, step = spec
    n = int(round((stop - start) / step)) + 1
    return np.linspace(start, start + step * (n - 1), n)


def cache_dir() -> Path:
    """The folder of computed grids and memos: ``$RADWALK_CACHE`` when set, else the platform's user cache folder.

    The platform's folder comes from platformdirs: ``$XDG_CACHE_HOME/radwalk`` (``~/.cache/radwalk``) on Linux,
    ``~/Library/Caches/radwalk`` on macOS, ``%LOCALAPPDATA%\\radwalk\\Cache`` on Windows.

    Returns
    -------
    Path
        The folder; it is not created here (the writers create it when they first store something).
    """
    override = os.environ.get("RADWALK_CACHE")
    if override:
        return Path(override)
    return Path(platformdirs.user_cache_dir("radwalk", appauthor=False))


def _source_digest(*objs) -> str:
    h = hashlib.sha256()
    for obj in objs:
        mod = inspect.getmodule(type(obj) if not inspect.ismodule(obj) else obj)
        try:
            h.update(inspect.getsource(mod).encode())
        except (OSError, TypeError):
            h.update(repr(type(obj)).encode())
    return h.hexdigest()


class RelationGrid:
    """log10 R and log10 L (cgs) of one relation + opacity combination on a regular grid."""

    def __init__(self, table: np.ndarray):
        self.axes = [_axis(LOG_M), _axis(X_AXIS), _axis(LOG_Z)]
        self.table = table  # [nM, nX, nZ, 2]
        self._lo = np.array([a[0] for a in self.axes])
        self._step = np.array([a[1] - a[0] for a in self.axes])
        self._n = np.array([a.size for a in self.axes])
        nm, nx, nz = self._n
        self._flat = table.reshape(-1, 2)
        self._strides = np.array([nx * nz, nz, 1])
        self._bits = np.array([[a, b, c] for a in (0, 1) for b in (0, 1) for c in (0, 1)])
        self._offsets = self._bits @ self._strides  # [8]
        self._top = [int(t) for t in self._n - 1]
        self._inv = 1.0 / self._step

    @classmethod
    def build(cls, relation, opacity, rel_kwargs: dict, block: int = _BLOCK) -> RelationGrid:
        lm, xa, lz = (_axis(s) for s in (LOG_M, X_AXIS, LOG_Z))
        LM, XX, LZ = np.meshgrid(lm, xa, lz, indexing="ij")
        M = 10.0 ** LM.ravel() * k.M_SUN
        X = XX.ravel()
        Z = 10.0 ** LZ.ravel()
        out = np.empty((M.size, 2))
        with np.errstate(all="ignore"):
            for s in range(0, M.size, block):
                sl = slice(s, s + block)
                R, L = relation.predict(M[sl], X[sl], Z[sl], opacity, **rel_kwargs)
                out[sl, 0] = np.log10(R)
                out[sl, 1] = np.log10(L)
        return cls(out.reshape(LM.shape + (2,)))

    def __call__(self, M_msun, X, Z):
        """Interpolated (R cm, L erg/s, inside) — trilinear in log R and log L.

        ``inside`` [n] marks points within the grid; R and L are NaN elsewhere.
        Written with few, whole-array numpy calls: it runs in the sampler's inner loop.
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            u0 = (np.log10(M_msun) - self._lo[0]) * self._inv[0]
            u2 = (np.log10(Z) - self._lo[2]) * self._inv[2]
        u1 = (np.asarray(X, dtype=float) - self._lo[1]) * self._inv[1]
        inside = ((u0 >= 0) & (u0 <= self._top[0]) & (u1 >= 0) & (u1 <= self._top[1])
                  & (u2 >= 0) & (u2 <= self._top[2]))
        i0 = np.clip(u0.astype(np.intp), 0, self._top[0] - 1)  # u >= 0 inside, so int() is floor
        i1 = np.clip(u1.astype(np.intp), 0, self._top[1] - 1)
        i2 = np.clip(u2.astype(np.intp), 0, self._top[2] - 1)
        f0 = (u0 - i0)[:, None, None, None]
        f1 = (u1 - i1)[:, None, None]
        f2 = (u2 - i2)[:, None]
        base = i0 * self._strides[0] + i1 * self._strides[1] + i2
        c = self._flat[base[:, None] + self._offsets].reshape(-1, 2, 2, 2, 2)  # [n, M, X, Z, (R, L)]
        c = c[:, 0] + f0 * (c[:, 1] - c[:, 0])
        c = c[:, 0] + f1 * (c[:, 1] - c[:, 0])
        v = c[:, 0] + f2 * (c[:, 1] - c[:, 0])  # [n, 2]
        v[~inside] = np.nan
        return 10.0 ** v[:, 0], 10.0 ** v[:, 1], inside


def _options_digest(options: dict) -> str:
    """Option values; files they name are hashed by content (an edited table is a new grid)."""
    h = hashlib.sha256()
    for name, value in sorted(options.items()):
        p = Path(str(value)).expanduser()
        if p.is_file():  # a file counts by its content, wherever it lies
            h.update(f"{name}=file:".encode() + hashlib.sha256(p.read_bytes()).digest())
        else:
            h.update(f"{name}={value}".encode())
    return h.hexdigest()


def grid_for(relation, opacity_law, opacity_kwargs: dict, rel_kwargs: dict, bound_opacity,
             options: dict | None = None) -> RelationGrid:
    """The grid for this combination, from memory, disk, or built now (and saved)."""
    key_data = {
        "relation": relation.name, "opacity": opacity_law.name,
        "opacity_params": {a: float(v) for a, v in sorted(opacity_kwargs.items())},
        "relation_params": {a: float(v) for a, v in sorted(rel_kwargs.items())},
        "options": _options_digest(options or {}),
        "axes": [LOG_M, X_AXIS, LOG_Z],
        "source": _source_digest(relation, opacity_law),
        "host": _source_digest(nuclear, lane_emden, inspect.getmodule(RelationGrid)),
    }
    key = hashlib.sha256(json.dumps(key_data, sort_keys=True).encode()).hexdigest()[:24]
    if key in _MEMORY:
        return _MEMORY[key]
    path = cache_dir() / f"relation-{relation.name}-{opacity_law.name}-{key}.npy"
    grid = None
    if path.is_file():
        try:
            grid = RelationGrid(np.load(path))
        except (OSError, ValueError):
            grid = None
    if grid is None:
        grid = RelationGrid.build(relation, bound_opacity, rel_kwargs)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            tmp = path.with_suffix(f".{os.getpid()}.tmp.npy")
            np.save(tmp, grid.table)
            os.replace(tmp, path)
        except OSError:
            pass  # a read-only cache only costs rebuilding
    _MEMORY[key] = grid
    return grid
