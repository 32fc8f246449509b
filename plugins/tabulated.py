"""The ``tabulated`` opacity law: a user's table of log10 kappa on a log rho x log T grid.

A table holds one grid of log10 kappa over (log10 rho, log10 T) for each of
several compositions.  The compositions must form a full product of X values
and Z values (one X and one Z is fine; so is a line of X at one Z): each
(X, Z) pair is one table, and every table uses the same log rho and log T
grid.

Interpolation
-------------
* In (log rho, log T): an interpolating bicubic spline of log10 kappa
  (``scipy.interpolate.RectBivariateSpline`` with kx = ky = 3, s = 0), which
  passes through every table value and has continuous first and second
  derivatives, so the opacity gradients a structure model feels are smooth.
  It is not monotone: next to a sharp feature (an ionisation bump) it can
  overshoot by a fraction of the step between neighbouring values.  Each axis
  needs at least 4 points.
* In X and Z: linear in kappa (not log kappa) between the bracketing tables.
  The opacity of a mixture is close to a mass-fraction-weighted sum of its
  parts (electron scattering goes as 1 + X, bound-free as Z, free-free as
  1 - Z), so linear in kappa is exact for those laws; it also keeps kappa
  positive.

Outside the grid
----------------
Option ``outside``: ``clip`` (default) moves points outside the grid (in
rho, T, X or Z) to its edge and warns with a ValidityWarning saying which
edges were crossed; ``error`` raises a ModelError naming the first such point.  Points within 1e-9 dex
(rho, T) or 1e-12 (X, Z) of the edge count as inside, so that the edges of
:attr:`Tabulated.validity` themselves evaluate without a warning.

File formats
------------
The format is recognised from the first line: ``# %ECSV`` is ECSV, anything
else is the text layout.

1. ECSV (read with astropy.table), long format, one row per grid point:
   columns ``log_rho``, ``log_T`` and ``log_kappa`` with units
   ``dex(g / cm3)``, ``dex(K)`` and ``dex(cm2 / g)`` (astropy's way of writing
   "log10 of"; other units of the same kind, e.g. ``dex(kg / m3)``, are
   converted), and the composition as columns ``X`` and ``Z`` or, for a
   single value, as meta keys ``X`` and ``Z``.

2. Text layout (radwalk's own).  Lines starting with ``#`` are header lines;
   ``# key: value`` sets a key, any other ``#`` line is a comment.  The file
   header, before the first block, gives::

       # axes: log_rho log_T
       # units: g/cm^3 K cm^2/g

   ``axes`` says that rows run in log10 rho and columns in log10 T; ``units``
   gives the units of rho, T and kappa whose log10 the numbers are (any
   astropy unit string of the right kind; kg/m^3 is converted).  Then one or
   more blocks, each starting with its composition::

       # X: 0.70
       # Z: 0.02
                3.80    3.90    4.00  ...    <- log10 T of each column
       -8.00   -0.412  -0.398  -0.377 ...    <- log10 rho, then log10 kappa
       -7.90   ...                              at each log10 T

   Numbers are separated by whitespace.  log T values and log rho values must
   increase strictly, every row must have one log kappa per log T, and every
   block must have the same log rho and log T values.

Every problem with a table raises a ConfigError of one line that names the
file (and the line, for the text layout) and what is wrong.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path

import astropy.units as u
import numpy as np
from scipy.interpolate import RectBivariateSpline

from radwalk.errors import ConfigError, ModelError, ValidityWarning
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Option, Validity

# The three quantities a table holds, with the unit of the quantity whose log10 is stored.
AXIS_UNITS = {"log_rho": u.g / u.cm**3, "log_T": u.K, "log_kappa": u.cm**2 / u.g}
MIN_POINTS = 4  # a cubic spline needs four values along each axis
EDGE_TOL_DEX = 1e-9  # log10(10**a) may differ from a by an ulp: those points are on the grid
EDGE_TOL_FRACTION = 1e-12
OUTSIDE_CHOICES = ("clip", "error")
NEEDS_TABLE = "tabulated opacity needs a table: --set table=PATH"
_AXIS_LABELS = (("rho", "g/cm^3"), ("T", "K"), ("X", ""), ("Z", ""))


@dataclass(frozen=True)
class OpacityTable:
    """A read and checked opacity table.

    Attributes
    ----------
    path : str
        Where it was read from.
    log_rho : ndarray [nr], log10 g/cm^3
    log_T : ndarray [nt], log10 K
        Strictly increasing grid axes.
    X, Z : ndarray [nx], [nz]
        Strictly increasing composition axes.
    log_kappa : ndarray [nx, nz, nr, nt], log10 cm^2/g
    """

    path: str
    log_rho: np.ndarray
    log_T: np.ndarray
    X: np.ndarray
    Z: np.ndarray
    log_kappa: np.ndarray


@dataclass
class _Block:
    """One composition's grid as read, before the blocks are put together."""

    X: float
    Z: float
    log_rho: np.ndarray
    log_T: np.ndarray
    log_kappa: np.ndarray  # [nr, nt]
    where: str  # for messages: "line 12" or "rows with X=0.7, Z=0.02"


def _fail(path, message: str):
    raise ConfigError(f"opacity table {path}: {message}")


def _log_offset(path, what: str, unit, expected) -> float:
    """Added to log10 values in ``unit`` to give log10 values in ``expected`` (cgs)."""
    try:
        scale = u.Unit(unit).to(expected)
    except (u.UnitsError, ValueError, TypeError):
        _fail(path, f"{what} has unit {unit!s}, which is not a unit of {expected.physical_type} "
                    f"(expected {expected})")
    return float(np.log10(scale))


def read_table(path) -> OpacityTable:
    """Reads and checks an opacity table in either format.

    Parameters
    ----------
    path : str or Path
        ECSV file (first line ``# %ECSV``) or radwalk text layout.

    Returns
    -------
    OpacityTable

    Raises
    ------
    ConfigError
        Naming the file and what is wrong with it.
    """
    p = Path(path).expanduser()
    if not p.is_file():
        _fail(p, "file does not exist" if not p.exists() else "is not a file")
    try:
        with p.open(encoding="utf-8") as fh:
            first = fh.readline()
    except (OSError, UnicodeDecodeError) as exc:
        _fail(p, f"cannot be read: {exc}")
    blocks = _read_ecsv(p) if first.startswith("# %ECSV") else _read_text(p)
    return _assemble(p, blocks)


# -- ECSV ----------------------------------------------------------------
def _read_ecsv(path: Path) -> list[_Block]:
    from astropy.table import Table

    try:
        with warnings.catch_warnings():
            # An unknown unit string comes back as UnrecognizedUnit and is reported below.
            warnings.simplefilter("ignore", u.UnitsWarning)
            tab = Table.read(path, format="ascii.ecsv")
    except Exception as exc:  # noqa: BLE001 - astropy raises many kinds for a broken file
        _fail(path, f"is not a readable ECSV table: {type(exc).__name__}: {exc}")
    cols = {}
    for name, expected in AXIS_UNITS.items():
        if name not in tab.colnames:
            _fail(path, f"has no column {name} (needs columns {', '.join(AXIS_UNITS)})")
        unit = tab[name].unit
        if unit is None:
            _fail(path, f"column {name} has no unit; it holds log10 of {expected}, so give it unit "
                        f"{u.dex(expected)}")
        if isinstance(unit, u.UnrecognizedUnit) or not isinstance(unit, u.DexUnit):
            _fail(path, f"column {name} has unit {unit!s}; it must be a log10 unit such as "
                        f"{u.dex(expected)}")
        cols[name] = _column(path, tab, name) + _log_offset(
            path, f"column {name}", unit.physical_unit, expected)
    for name in ("X", "Z"):
        if name in tab.colnames:
            unit = tab[name].unit
            if unit is not None and unit != u.dimensionless_unscaled:
                _fail(path, f"column {name} is a mass fraction and takes no unit, has {unit!s}")
            cols[name] = _column(path, tab, name)
        elif name in tab.meta:
            try:
                cols[name] = np.full(len(tab), float(tab.meta[name]))
            except (TypeError, ValueError):
                _fail(path, f"meta key {name} = {tab.meta[name]!r} is not a number")
        else:
            _fail(path, f"states no {name}: give a column {name} or, for one composition, a meta key {name}")
    if len(tab) == 0:
        _fail(path, "has no rows")

    blocks = []
    pairs = np.unique(np.column_stack([cols["X"], cols["Z"]]), axis=0)
    for X, Z in pairs:
        rows = np.flatnonzero((cols["X"] == X) & (cols["Z"] == Z))
        where = f"rows with X={X:g}, Z={Z:g}"
        lr, lt, lk = (cols[k][rows] for k in AXIS_UNITS)
        ur, ut = np.unique(lr), np.unique(lt)
        i, j = np.searchsorted(ur, lr), np.searchsorted(ut, lt)
        count = np.zeros((ur.size, ut.size), dtype=int)
        np.add.at(count, (i, j), 1)
        if np.any(count != 1):
            a, b = np.argwhere(count != 1)[0]
            state = "is missing" if count[a, b] == 0 else f"appears {count[a, b]} times"
            _fail(path, f"{where}: ragged grid: the point log_rho={ur[a]:g}, log_T={ut[b]:g} {state} "
                        f"(every log_rho needs a row at every log_T; {ur.size} x {ut.size} grid)")
        grid = np.empty((ur.size, ut.size))
        grid[i, j] = lk
        blocks.append(_Block(float(X), float(Z), ur, ut, grid, where))
    return blocks


def _column(path, tab, name: str) -> np.ndarray:
    col = tab[name]
    values = np.asarray(col.filled(np.nan) if hasattr(col, "filled") else col, dtype=float)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        _fail(path, f"data row {bad[0] + 1}: {name} is {values[bad[0]]} (missing or not finite)")
    return values


# -- text layout ---------------------------------------------------------
_HEADER_KEYS = ("axes", "units", "X", "Z")


def _numbers(path, lineno: int, text: str) -> np.ndarray:
    try:
        values = np.array([float(t) for t in text.split()])
    except ValueError as exc:
        _fail(path, f"line {lineno}: cannot read a number ({exc})")
    if not np.all(np.isfinite(values)):
        bad = text.split()[int(np.flatnonzero(~np.isfinite(values))[0])]
        _fail(path, f"line {lineno}: entry {bad!r} is not a finite number")
    return values


def _read_text(path: Path) -> list[_Block]:
    header: dict[str, tuple[int, str]] = {}
    blocks: list[_Block] = []
    current: dict | None = None  # the block being read: X, Z, log_T row, data rows

    def finish():
        if current is None:
            return
        if "log_T" not in current:
            _fail(path, f"block starting line {current['line']} has no log_T row")
        if not current["rows"]:
            _fail(path, f"block starting line {current['line']} has no log_rho rows")
        rows = current["rows"]
        lr = np.array([r[1][0] for r in rows])
        step = np.flatnonzero(np.diff(lr) <= 0)
        if step.size:
            a = step[0]
            _fail(path, f"line {rows[a + 1][0]}: log_rho values are not strictly increasing "
                        f"({lr[a]:g} then {lr[a + 1]:g})")
        blocks.append(_Block(current["X"], current["Z"], lr, current["log_T"],
                             np.array([r[1][1:] for r in rows]), f"block starting line {current['line']}"))

    with path.open(encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    for lineno, raw in enumerate(lines, start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            key, sep, value = line[1:].partition(":")
            key, value = key.strip(), value.strip()
            if not sep or key not in _HEADER_KEYS:
                continue  # a comment
            if key in ("axes", "units"):
                if blocks or current is not None:
                    _fail(path, f"line {lineno}: '{key}:' belongs in the file header, before the first "
                                "'# X:'")
                if key in header:
                    _fail(path, f"line {lineno}: '{key}:' given twice (first at line {header[key][0]})")
                header[key] = (lineno, value)
                continue
            try:
                number = float(value)
            except ValueError:
                _fail(path, f"line {lineno}: {key} = {value!r} is not a number")
            if current is None or current["rows"] or "log_T" in current:
                finish()
                current = {"line": lineno, "rows": []}
            if key in current:
                _fail(path, f"line {lineno}: {key} given twice in the block starting line {current['line']}")
            current[key] = number
            continue
        # a row of numbers
        if current is None:
            missing = [k for k in ("axes", "units") if k not in header]
            if missing:
                _fail(path, f"line {lineno}: data before the header line '# {missing[0]}: ...'")
            _fail(path, f"line {lineno}: data before the block header lines '# X: ...' and '# Z: ...'")
        values = _numbers(path, lineno, line)
        for key in ("X", "Z"):
            if key not in current:
                _fail(path, f"line {lineno}: the block starting line {current['line']} has no "
                            f"header line '# {key}: ...'")
        if "log_T" not in current:
            step = np.flatnonzero(np.diff(values) <= 0)
            if step.size:
                a = step[0]
                _fail(path, f"line {lineno}: log_T values are not strictly increasing "
                            f"({values[a]:g} then {values[a + 1]:g})")
            current["log_T"] = values
            current["log_T_line"] = lineno
            continue
        nt = current["log_T"].size
        if values.size != nt + 1:
            _fail(path, f"line {lineno}: ragged grid: {values.size - 1} log_kappa values after log_rho, but "
                        f"the log_T row (line {current['log_T_line']}) has {nt}")
        current["rows"].append((lineno, values))
    finish()

    for key, example in (("axes", "log_rho log_T"), ("units", "g/cm^3 K cm^2/g")):
        if key not in header:
            _fail(path, f"missing header line '# {key}: {example}'")
    if header["axes"][1].split() != ["log_rho", "log_T"]:
        _fail(path, f"line {header['axes'][0]}: axes must read 'log_rho log_T' (rows log10 rho, "
                    f"columns log10 T), got {header['axes'][1]!r}")
    tokens = header["units"][1].split()
    if len(tokens) != 3:
        _fail(path, f"line {header['units'][0]}: units needs three units (rho, T, kappa), e.g. "
                    f"'g/cm^3 K cm^2/g', got {header['units'][1]!r}")
    if not blocks:
        _fail(path, "has no table: expected '# X:', '# Z:', a log_T row and log_rho rows")
    offsets = []
    for token, (name, expected) in zip(tokens, AXIS_UNITS.items()):
        try:
            unit = u.Unit(token)
        except ValueError:
            _fail(path, f"line {header['units'][0]}: {token!r} is not a unit astropy can read")
        offsets.append(_log_offset(path, f"line {header['units'][0]}: {name[4:]}", unit, expected))
    for b in blocks:
        b.log_rho = b.log_rho + offsets[0]
        b.log_T = b.log_T + offsets[1]
        b.log_kappa = b.log_kappa + offsets[2]
    return blocks


# -- putting blocks together ---------------------------------------------
def _assemble(path: Path, blocks: list[_Block]) -> OpacityTable:
    first = blocks[0]
    for name, axis in (("log_rho", first.log_rho), ("log_T", first.log_T)):
        if axis.size < MIN_POINTS:
            _fail(path, f"{first.where}: {axis.size} {name} values; bicubic interpolation needs at least "
                        f"{MIN_POINTS}")
    for b in blocks:
        if not (0.0 <= b.X <= 1.0 and 0.0 <= b.Z <= 1.0 and b.X + b.Z <= 1.0):
            _fail(path, f"{b.where}: X = {b.X:g}, Z = {b.Z:g} is not a composition "
                        f"(need 0 <= X, Z and X + Z <= 1)")
        for name in ("log_rho", "log_T"):
            mine, theirs = getattr(b, name), getattr(first, name)
            if mine.shape != theirs.shape or not np.allclose(mine, theirs, rtol=0, atol=1e-12):
                _fail(path, f"{b.where} has other {name} values than {first.where}; all compositions "
                            f"must share one grid")
    xs = np.unique([b.X for b in blocks])
    zs = np.unique([b.Z for b in blocks])
    grid = np.full((xs.size, zs.size) + first.log_kappa.shape, np.nan)
    for b in blocks:
        a, c = np.searchsorted(xs, b.X), np.searchsorted(zs, b.Z)
        if not np.isnan(grid[a, c, 0, 0]):
            _fail(path, f"{b.where}: a second table for X = {b.X:g}, Z = {b.Z:g}")
        grid[a, c] = b.log_kappa
    holes = np.argwhere(np.isnan(grid[:, :, 0, 0]))
    if holes.size:
        a, c = holes[0]
        _fail(path, f"no table for X = {xs[a]:g}, Z = {zs[c]:g}: the compositions must form a full "
                    f"grid of X values ({', '.join(f'{x:g}' for x in xs)}) times Z values "
                    f"({', '.join(f'{z:g}' for z in zs)})")
    return OpacityTable(str(path), first.log_rho, first.log_T, xs, zs, grid)


# -- the component -------------------------------------------------------
def _hat_weights(value: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Linear-interpolation weights [len(axis), n] of each node at ``value`` (inside the axis)."""
    if axis.size == 1:
        return np.ones((1, value.size))
    return np.array([np.interp(value, axis, e) for e in np.eye(axis.size)])


def _point(rho, T, X, Z) -> str:
    return f"rho={rho:.6g} g/cm^3, T={T:.6g} K, X={X:.6g}, Z={Z:.6g}"


class Tabulated:
    """Opacity interpolated in a user's table; see the module docstring for formats.

    Parameters
    ----------
    table : OpacityTable, optional
        The table; without one the component is unconfigured and
        :meth:`kappa` raises a ConfigError.
    outside : {"clip", "error"}
        What to do with points outside the grid.
    """

    name = "tabulated"
    description = ("opacity from a user table of log10 kappa over log10 rho x log10 T (bicubic), "
                   "linear in X and Z between tables")
    params = ()
    options = (
        Option("table", "path of the opacity table (ECSV, or radwalk's text layout)"),
        Option("outside", "points outside the table grid: clip to the edge and warn, or stop with an error",
               default="clip", choices=OUTSIDE_CHOICES),
    )

    def __init__(self, table: OpacityTable | None = None, outside: str = "clip"):
        if outside not in OUTSIDE_CHOICES:
            raise ConfigError(f"tabulated opacity: outside={outside!r} is not allowed; choose "
                              f"{' or '.join(OUTSIDE_CHOICES)}")
        self.table = table
        self.outside = outside
        self._splines = None
        if table is None:
            self.validity = Validity(note="range of the table given with --set table=PATH")
            return
        self._splines = [
            [RectBivariateSpline(table.log_rho, table.log_T, table.log_kappa[a, c], kx=3, ky=3, s=0)
             for c in range(table.Z.size)]
            for a in range(table.X.size)
        ]
        self.validity = Validity(
            T=(float(10.0 ** table.log_T[0]), float(10.0 ** table.log_T[-1])),
            rho=(float(10.0 ** table.log_rho[0]), float(10.0 ** table.log_rho[-1])),
            X=(float(table.X[0]), float(table.X[-1])),
            Z=(float(table.Z[0]), float(table.Z[-1])),
            note=f"grid of {table.path}",
        )

    def __repr__(self):
        where = self.table.path if self.table is not None else "no table"
        return f"Tabulated({where}, outside={self.outside!r})"

    def configure(self, **options) -> Tabulated:
        """A copy with the given options (``table``, ``outside``) applied.

        Without ``table`` the copy keeps this one's table (or stays
        unconfigured); ``table`` is read and checked here, once.
        """
        known = [o.name for o in self.options]
        for key in options:
            if key not in known:
                raise ConfigError(f"tabulated opacity has no option {key!r}; options: {', '.join(known)}")
        outside = options.get("outside") or self.outside
        path = options.get("table")
        table = read_table(path) if path else self.table
        return Tabulated(table, outside)

    def kappa(self, rho, T, X, Z, **params) -> np.ndarray:
        """Rosseland-mean opacity from the table.

        Parameters
        ----------
        rho : array_like, g/cm^3
        T : array_like, K
        X, Z : array_like
            Mass fractions; all four broadcast together, e.g. rho, T [n, g]
            with X, Z [n, 1].

        Returns
        -------
        ndarray, cm^2/g
            With the broadcast shape; NaN where an input is NaN or rho, T < 0
            (rho = 0 or T = 0, as at a surface, lies below the grid).
        """
        if self.table is None:
            raise ConfigError(NEEDS_TABLE)
        if params:
            raise ConfigError(f"tabulated opacity takes no parameters, got {', '.join(sorted(params))}")
        arrays = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (rho, T, X, Z)))
        shape = arrays[0].shape
        rho_f, T_f, X_f, Z_f = (a.ravel() for a in arrays)
        with np.errstate(divide="ignore", invalid="ignore"):
            lr = np.log10(rho_f)
            lt = np.log10(T_f)
        ok = ~(np.isnan(lr) | np.isnan(lt) | np.isnan(X_f) | np.isnan(Z_f))
        out = np.full(lr.shape, np.nan)
        if not ok.any():
            return out.reshape(shape)
        lr, lt, x, z = lr[ok], lt[ok], X_f[ok], Z_f[ok]
        tab = self.table
        axes = ((lr, tab.log_rho, EDGE_TOL_DEX), (lt, tab.log_T, EDGE_TOL_DEX),
                (x, tab.X, EDGE_TOL_FRACTION), (z, tab.Z, EDGE_TOL_FRACTION))
        outside = np.zeros(lr.shape, dtype=bool)
        crossed = []  # "rho above 100 g/cm^3" and the like, for the warning
        for (v, axis, tol), (key, unit) in zip(axes, _AXIS_LABELS):
            for side, mask, edge in (("below", v < axis[0] - tol, axis[0]),
                                     ("above", v > axis[-1] + tol, axis[-1])):
                if mask.any():
                    outside |= mask
                    shown = 10.0**edge if key in ("rho", "T") else edge
                    crossed.append(f"{key} {side} {shown:g} {unit}".rstrip())
        if outside.any():
            if self.outside == "error":
                first = np.flatnonzero(ok)[np.flatnonzero(outside)[0]]
                point = _point(rho_f[first], T_f[first], X_f[first], Z_f[first])
                raise ModelError(f"tabulated opacity ({tab.path}): {point} is outside the table grid "
                                 f"({self.validity.describe()})")
            # The same wording for the same kind of excursion, so repeated calls can be told apart
            # from new trouble (and Python's once-per-message filter can fold them).
            warnings.warn(f"tabulated opacity ({tab.path}) used outside its table, values clipped to the "
                          f"grid edge: {', '.join(crossed)}", ValidityWarning, stacklevel=2)
            lr, lt, x, z = (np.clip(v, axis[0], axis[-1]) for v, axis, _ in axes)
        else:
            # Within the tolerance of an edge: pull the point onto it so the spline is not extrapolated.
            lr, lt = (np.clip(v, axis[0], axis[-1]) for v, axis, _ in axes[:2])
        wx = _hat_weights(x, tab.X)
        wz = _hat_weights(z, tab.Z)
        value = np.zeros(lr.shape)
        for a, row in enumerate(self._splines):
            for c, spline in enumerate(row):
                w = wx[a] * wz[c]
                sel = w > 0
                if sel.all():
                    value += w * 10.0 ** spline.ev(lr, lt)
                elif sel.any():
                    value[sel] += w[sel] * 10.0 ** spline.ev(lr[sel], lt[sel])
        out[ok] = value
        return out.reshape(shape)


@hookimpl
def radwalk_opacities():
    return [Tabulated()]
