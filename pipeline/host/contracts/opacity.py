"""The opacity contract: ``kappa(rho, T, X, Z, **params)`` on a grid over the law's declared range.

The grid is log rho x log T over the law's stated validity (the defaults of
:mod:`radwalk.host.contracts.inputs` where it states none), with steps of at
most :data:`MAX_STEP_DEX`, at three compositions.  The law is called once on
all of it, as ``kappa(rho [n, g], T [n, g], X [n, 1], Z [n, 1], **params [n, 1])``;
the checks judge that one call, then the row-by-row calls and the timing.
"""

from __future__ import annotations

import math

import numpy as np

from radwalk import constants as k
from radwalk.host.contracts.inputs import checked_range, compositions, default_params, fmt_point
from radwalk.host.contracts.layers import star_row
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Check, Subject, inputs_row, time_per_million, warnings_row

STAGE = "opacity"

MAX_STEP_DEX = {"rho": 0.1, "T": 0.05}  # largest grid step of the opacity checks
MAX_GRID_POINTS = 400  # per axis
# Largest ratio between neighbouring grid values.  Over 0.05 dex in T and 0.1 dex in rho the steepest
# textbook law, H-minus with kappa ~ rho^0.5 T^9, changes by a factor 2.8, and Kramers (rho T^-3.5) by
# 1.5; a factor 10 between neighbours is a discontinuity (a switch between regimes without blending) or
# a slope beyond T^20, which no Rosseland mean has over such a step.
JUMP_FACTOR = 10.0
# Seconds per million evaluated points: a sampler step of 32 walkers on a 400-point profile evaluates
# 12 800 points, so at the limit the opacity alone costs 0.13 s a step.
SLOW_LIMIT = 10.0
LOOP_RTOL = 1e-12  # row-by-row calls must agree to rounding

# The electron-scattering floor of the ``units`` check.  A fully ionised gas scatters photons on its free
# electrons with the Thomson cross-section: kappa_es = sigma_T / (2 m_u) (1 + X) = 0.20 (1 + X) cm^2/g
# (Kippenhahn, Weigert & Weiss, Stellar Structure and Evolution, ch. 17.2), and a Rosseland mean of
# scattering plus absorption is never below the scattering alone.  The floor holds where
#  * hydrogen and helium are fully ionised: T >= FLOOR_T_MIN (helium's second ionisation, 54.4 eV, is
#    complete by ~1e5 K at stellar densities; 1e6 K leaves a factor 10 of margin: common practice, no source);
#  * the photons are soft: T <= FLOOR_T_MAX, where the Klein-Nishina cross-section is below Thomson's by about
#    2 h nu / (m_e c^2), 13 % for the Rosseland-weighted photon energy ~4 kT (from memory);
#  * the electrons are not degenerate (degeneracy blocks scattering into occupied states): rho at most
#    FLOOR_DEGENERACY of the density where the electrons' Fermi energy equals kT (:func:`degenerate_density`).
# There a real opacity is at least ~0.7 of the floor; a law in m^2/kg instead of cm^2/g is 0.1 of it.
FLOOR_T_MIN = 1e6  # K
FLOOR_T_MAX = 1e8  # K
FLOOR_DEGENERACY = 0.1
FLOOR_FRACTION = 0.5  # the check fails below this fraction of the floor ...
# ... where the law is flat like scattering: |d ln kappa / d ln T| and |d ln kappa / d ln rho| below this.  A law
# of absorption alone (Kramers: slopes -3.5 and 1) falls below the floor by orders of magnitude at high T; that
# is a missing scattering term, not a unit, and is reported without failing.
FLOOR_FLAT_SLOPE = 0.5


def electron_scattering_floor(X):
    """Thomson opacity of a fully ionised gas, sigma_T (1 + X) / (2 m_u), cm^2/g (0.200 (1 + X)).

    Kippenhahn, Weigert & Weiss, Stellar Structure and Evolution, ch. 17.2.
    """
    return k.SIGMA_T * (1.0 + np.asarray(X, dtype=float)) / (2.0 * k.M_U)


def degenerate_density(T, X):
    """Density (g/cm^3) at which the free electrons' Fermi energy equals kT, the onset of degeneracy.

    n_e = (8 pi / 3) (2 m_e k T)^(3/2) / h^3 (a full Fermi sphere of momentum p_F with p_F^2 / 2 m_e = kT),
    rho = n_e mu_e m_u with mu_e = 2 / (1 + X) for a fully ionised gas.
    """
    n_e = 8.0 * math.pi / 3.0 * (2.0 * k.M_E * k.K_B * np.asarray(T, dtype=float)) ** 1.5 / k.H_PLANCK**3
    return n_e * 2.0 / (1.0 + np.asarray(X, dtype=float)) * k.M_U


class _Grid:
    """The points of the check: rho, T [n, g] and X, Z, parameters [n, 1]."""

    def __init__(self, comp, grid_points):
        validity = getattr(comp, "validity", None)
        axes = {}
        for key in ("rho", "T"):
            (lo, hi), _ = checked_range(validity, key)
            span = math.log10(hi / lo)
            n = grid_points or min(MAX_GRID_POINTS, max(5, math.ceil(span / MAX_STEP_DEX[key] - 1e-9) + 1))
            axes[key] = np.geomspace(lo, hi, n) if hi > lo else np.full(1, lo)
        self.rho_axis, self.T_axis = axes["rho"], axes["T"]
        comps = compositions(validity)
        self.n, self.g = comps.shape[0], self.rho_axis.size * self.T_axis.size
        self.R, self.T = (np.broadcast_to(a.ravel(), (self.n, self.g)).copy()
                          for a in np.meshgrid(self.rho_axis, self.T_axis, indexing="ij"))
        self.X, self.Z = comps[:, :1].copy(), comps[:, 1:].copy()
        self.params = default_params(comp, (self.n, 1))

    def point(self, i, j) -> str:
        return fmt_point(rho=self.R[i, j], T=self.T[i, j], X=self.X[i, 0], Z=self.Z[i, 0])


# -- evaluations, each once per subject ---------------------------------------------------
def _grid(s: Subject) -> _Grid:
    return s.memo("opacity.grid", lambda: _Grid(s.component, s.grid_points))


def _call(s: Subject):
    """(ok, kappa on the grid or the exception as text)."""
    def call():
        g = _grid(s)
        return s.call(s.component.kappa, g.R, g.T, g.X, g.Z, **g.params)

    return s.memo("opacity.call", call)


def _shaped(s: Subject) -> bool:
    """Whether the call returned, with the shape of the grid."""
    if s.component is None or not _call(s)[0]:
        return False
    g = _grid(s)
    return np.shape(_call(s)[1]) == (g.n, g.g)


def _values(s: Subject):
    """The grid values as floats [n, g], None if they are not numbers (or the call did not return [n, g])."""
    def convert():
        if not _shaped(s):
            return None
        try:
            return np.asarray(_call(s)[1]).astype(float)
        except (TypeError, ValueError):
            return None

    return s.memo("opacity.values", convert)


def _loop(s: Subject) -> str | None:
    """Row-by-row calls with scalar X, Z, then one call with scalars: the first difference, or None."""
    def compare():
        g, out = _grid(s), _values(s)
        kappa = s.component.kappa
        for i in range(g.n):
            row_params = {name: float(v[i, 0]) for name, v in g.params.items()}
            ok, row = s.call(kappa, g.R[i], g.T[i], float(g.X[i, 0]), float(g.Z[i, 0]), **row_params)
            if not ok:
                return f"a call for sample {i} with scalar X, Z raised {row}"
            row = np.asarray(row, dtype=float)
            if row.shape != (g.g,):
                return f"a call with rho, T [{g.g}] and scalar X, Z returned shape {list(row.shape)}"
            same = np.isclose(row, out[i], rtol=LOOP_RTOL, atol=0.0, equal_nan=True)
            if not same.all():
                j = int(np.flatnonzero(~same)[0])
                return (f"sample {i} alone gives {row[j]:.6g} but {out[i, j]:.6g} in the [n, g] call, "
                        f"at {g.point(i, j)}")
        ok, one = s.call(kappa, float(g.R[0, 0]), float(g.T[0, 0]), float(g.X[0, 0]), float(g.Z[0, 0]),
                         **{name: float(v[0, 0]) for name, v in g.params.items()})
        if not ok:
            return f"a call with scalars raised {one}"
        if np.ndim(one) != 0:
            return f"a call with scalars returned shape {list(np.shape(one))}, not a scalar"
        if not np.isclose(float(one), out[0, 0], rtol=LOOP_RTOL, atol=0.0, equal_nan=True):
            return f"a call with scalars gives {float(one):.6g} but {out[0, 0]:.6g} in the [n, g] call"
        return None

    return s.memo("opacity.loop", compare)


# -- the checks ------------------------------------------------------------------------------
def check_opacity_call(subject) -> CheckRow | None:
    """``kappa`` runs on the grid: rho, T [n, g] with X, Z and parameters [n, 1]."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    g = _grid(s)
    ok, out = _call(s)
    if not ok:
        return CheckRow("call", False, f"kappa(rho [{g.n}, {g.g}], T [{g.n}, {g.g}], X [{g.n}, 1], Z [{g.n}, 1]) "
                                       f"raised {out}")
    rho, T = g.rho_axis, g.T_axis
    return CheckRow("call", True, f"kappa on {g.n} compositions x {rho.size} rho x {T.size} T "
                                  f"(rho {rho[0]:g}..{rho[-1]:g} g/cm^3, T {T[0]:g}..{T[-1]:g} K)")


def check_opacity_shape(subject) -> CheckRow | None:
    """The grid call returns the broadcast shape of the inputs, [n, g]."""
    s = Subject.of(subject)
    if s.component is None or not _call(s)[0]:
        return None
    g = _grid(s)
    if _shaped(s):
        return CheckRow("shape", True, f"[{g.n}, {g.g}] as the inputs")
    shape = list(np.shape(_call(s)[1]))
    return CheckRow("shape", False, f"returned shape {shape} for rho, T [{g.n}, {g.g}] with X, Z [{g.n}, 1]; "
                                    f"expected [{g.n}, {g.g}]")


def check_opacity_finite(subject) -> CheckRow | None:
    """Every value on the grid is a finite number."""
    s = Subject.of(subject)
    if not _shaped(s):
        return None
    out = _values(s)
    if out is None:
        return CheckRow("finite", False, f"returned {np.asarray(_call(s)[1]).dtype} values, not numbers")
    finite = np.isfinite(out)
    if finite.all():
        return CheckRow("finite", True, f"all {out.size} values finite")
    i, j = np.argwhere(~finite)[0]
    return CheckRow("finite", False, f"{int((~finite).sum())} of {out.size} values not finite; first at "
                                     f"{_grid(s).point(i, j)}: kappa={out[i, j]}")


def check_opacity_positive(subject) -> CheckRow | None:
    """Every finite value on the grid is > 0."""
    s = Subject.of(subject)
    out = _values(s)
    if out is None:
        return None
    positive = ~np.isfinite(out) | (out > 0)
    if positive.all():
        return CheckRow("positive", True, "all finite values > 0")
    i, j = np.argwhere(~positive)[0]
    return CheckRow("positive", False, f"{int((~positive).sum())} of {out.size} values <= 0; first at "
                                       f"{_grid(s).point(i, j)}: kappa={out[i, j]:.6g} cm^2/g")


def check_opacity_broadcasting(subject) -> CheckRow | None:
    """Row-by-row calls with scalar X, Z, and a call with scalars only, equal the [n, g] call."""
    s = Subject.of(subject)
    if _values(s) is None:
        return None
    mismatch = _loop(s)
    return CheckRow("broadcasting", mismatch is None, mismatch or
                    f"{_grid(s).n} row-by-row calls with scalar X, Z and a scalar call equal the [n, g] call")


def check_opacity_warnings(subject) -> CheckRow | None:
    """No warning is emitted inside the law's own validity range (by the grid call or the row-by-row calls)."""
    s = Subject.of(subject)
    if s.component is None or not _call(s)[0]:
        return None
    if not _shaped(s):
        return warnings_row(s, "during the call")
    if _values(s) is None:
        return None
    _loop(s)
    return warnings_row(s, "inside the validity range")


def check_opacity_smoothness(subject) -> CheckRow | None:
    """No two neighbouring grid values differ by more than a factor ``JUMP_FACTOR``."""
    s = Subject.of(subject)
    out = _values(s)
    if out is None:
        return None
    g = _grid(s)
    finite = np.isfinite(out)
    with np.errstate(divide="ignore", invalid="ignore"):
        logk = np.where(finite & (out > 0), np.log10(np.where(out > 0, out, 1.0)), np.nan)
    cube = logk.reshape(g.n, g.rho_axis.size, g.T_axis.size)
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
            j = a * g.T_axis.size + b
            j2 = j + (g.T_axis.size if axis == 1 else 1)
            if first is None or (c, j) < first[:2]:
                first = (c, j, j2)
    rho, T = g.rho_axis, g.T_axis
    steps = (f"steps {math.log10(rho[-1] / rho[0]) / max(rho.size - 1, 1):.3g} dex in rho, "
             f"{math.log10(T[-1] / T[0]) / max(T.size - 1, 1):.3g} dex in T")
    if first is None:
        return CheckRow("smoothness", True, f"largest ratio between neighbours {10 ** largest:.3g} "
                                            f"(limit {JUMP_FACTOR:g}; {steps})")
    i, j, j2 = first
    factor = max(out[i, j], out[i, j2]) / min(out[i, j], out[i, j2])
    return CheckRow("smoothness", False,
                    f"kappa jumps by a factor {factor:.3g} (limit {JUMP_FACTOR:g}; {steps}) between "
                    f"{g.point(i, j)}: kappa={out[i, j]:.6g} and {fmt_point(rho=g.R[i, j2], T=g.T[i, j2])}: "
                    f"kappa={out[i, j2]:.6g}; largest ratio anywhere {10 ** largest:.3g}")


def check_opacity_units(subject) -> CheckRow | None:
    """Where the gas is hot, ionised and not degenerate, kappa is not far below electron scattering, 0.2(1+X) cm^2/g.

    A law written in m^2/kg instead of cm^2/g is 10 times too low and fails here (``FLOOR_FRACTION`` of the
    floor).  Points are those of the grid with ``FLOOR_T_MIN`` <= T <= ``FLOOR_T_MAX`` and rho at most
    ``FLOOR_DEGENERACY`` of the degenerate density; a law whose validity holds none passes unchecked.
    """
    s = Subject.of(subject)
    out = _values(s)
    if out is None:
        return None
    g = _grid(s)
    floor = electron_scattering_floor(g.X)  # [n, 1]
    hot = ((g.T >= FLOOR_T_MIN) & (g.T <= FLOOR_T_MAX) & (g.R <= FLOOR_DEGENERACY * degenerate_density(g.T, g.X))
           & np.isfinite(out))
    where = (f"{FLOOR_T_MIN:g} <= T <= {FLOOR_T_MAX:g} K, non-degenerate")
    if not hot.any():
        return CheckRow("units", True, f"not checked: the validity range has no fully ionised point ({where})")
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(hot, out / floor, np.inf)
    i, j = np.unravel_index(int(np.argmin(ratio)), ratio.shape)
    lowest = float(ratio[i, j])
    if lowest >= FLOOR_FRACTION:
        return CheckRow("units", True, f"kappa >= {lowest:.3g} x the electron-scattering floor 0.2(1+X) cm^2/g at "
                                       f"all {int(hot.sum())} fully ionised points ({where})")
    low = int((hot & (ratio < FLOOR_FRACTION)).sum())
    slope_T, slope_rho = _log_slopes(g, out, i, j)
    if max(abs(slope_T), abs(slope_rho)) >= FLOOR_FLAT_SLOPE:
        return CheckRow("units", True,
                        f"not judged: kappa falls to {lowest:.3g} x the electron-scattering floor 0.2(1+X) cm^2/g "
                        f"at {g.point(i, j)}, where it runs as T^{slope_T:.2g} rho^{slope_rho:.2g}: absorption "
                        "without electron scattering, not a unit; a fit takes the law as the whole opacity")
    return CheckRow("units", False,
                    f"kappa={out[i, j]:.4g} cm^2/g at {g.point(i, j)} is {lowest:.3g} x the electron-scattering "
                    f"floor 0.2(1+X) = {float(floor[i, 0]):.4g} cm^2/g of a fully ionised gas (Thomson scattering; "
                    f"Kippenhahn, Weigert & Weiss ch. 17), below which no opacity falls there; {low} of "
                    f"{int(hot.sum())} such points are below {FLOOR_FRACTION:g} x the floor: check the units "
                    f"(kappa in cm^2/g; 1 m^2/kg = 10 cm^2/g)")


def _log_slopes(g: _Grid, out, i: int, j: int) -> tuple[float, float]:
    """d ln kappa / d ln T and d ln kappa / d ln rho at grid point (i, j), from its neighbours (0 on a 1-point axis)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        cube = np.log(np.where(out > 0, out, np.nan)).reshape(g.n, g.rho_axis.size, g.T_axis.size)[i]
    a, b = np.unravel_index(j, cube.shape)
    slopes = []
    for axis, values, at in ((1, g.T_axis, b), (0, g.rho_axis, a)):
        if values.size < 2:
            slopes.append(0.0)
            continue
        lo, hi = max(at - 1, 0), min(at + 1, values.size - 1)
        ends = (cube[a, lo], cube[a, hi]) if axis == 1 else (cube[lo, b], cube[hi, b])
        slope = (ends[1] - ends[0]) / math.log(values[hi] / values[lo])
        slopes.append(float(slope) if np.isfinite(slope) else 0.0)
    return slopes[0], slopes[1]


def check_opacity_star(subject) -> CheckRow | None:
    """kappa is finite and > 0 in every layer of stars of the default model, inside the stated range or not.

    The stars are solved zero-age stars of the default profile with the default law, spread over the
    profile's mass range (:mod:`.layers`); a fit evaluates the law in all their layers, so a law NaN or
    negative in a cool envelope outside its stated range fails here, naming rho, T and r/R.
    """
    s = Subject.of(subject)
    if s.component is None or not _call(s)[0]:
        return None
    return star_row(s)


def check_opacity_speed(subject) -> CheckRow | None:
    """The grid call costs at most ``SLOW_LIMIT`` seconds per million points."""
    s = Subject.of(subject)
    out = _values(s)
    if out is None:
        return None
    g, kappa = _grid(s), s.component.kappa
    per_million = time_per_million(lambda: kappa(g.R, g.T, g.X, g.Z, **g.params), out.size)
    s.seconds_per_million = per_million
    return CheckRow("speed", per_million <= SLOW_LIMIT,
                    f"{per_million:.3g} s per million points (limit {SLOW_LIMIT:g} s)")


def check_opacity_inputs(subject) -> CheckRow | None:
    """``kappa`` leaves rho, T, X, Z and the parameters as it was given them (no writes into its inputs)."""
    s = Subject.of(subject)
    if s.component is None:
        return None
    return inputs_row(s, _call, _grid(s), _Grid(s.component, s.grid_points),
                      {"rho": "R", "T": "T", "X": "X", "Z": "Z", "params": "params"})


# in report order
CHECKS = (
    Check("call", check_opacity_call),
    Check("shape", check_opacity_shape),
    Check("finite", check_opacity_finite),
    Check("positive", check_opacity_positive),
    Check("broadcasting", check_opacity_broadcasting),
    Check("warnings", check_opacity_warnings),
    Check("smoothness", check_opacity_smoothness),
    Check("units", check_opacity_units),
    Check("star", check_opacity_star),
    Check("speed", check_opacity_speed),
    Check("inputs", check_opacity_inputs),
)
