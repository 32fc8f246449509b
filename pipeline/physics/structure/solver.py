"""Henyey relaxation of zero-age (or given-composition) main-sequence stars.

Newton's method on the whole mass mesh at once (Henyey, Forbes & Gould
1964, ApJ 139, 306; Kippenhahn, Weigert & Weiss 2012, ch. 12): the
difference equations of :mod:`.equations` tie each interval to its two end
points only, so the Jacobian is block-bidiagonal with 4 x 4 blocks (band
width 5 below and above the diagonal in the ordering used here).  It is
built by finite differences from 8 perturbed models, one per unknown and
parity of the point (a residual never sees two points of the same parity),
all evaluated in one batched call, and solved with a banded LAPACK routine
(scipy.linalg.solve_banded).  One global damping factor limits the largest
change of any logarithmic unknown to 0.5 per iteration; a step that leads to
non-finite residuals is halved.  The iteration stops when the largest
correction and the largest residual are below the tolerance, or raises a
:class:`~radwalk.errors.ModelError` after ``max_iter`` iterations.

Validated range (see the tests): 0.5-20 M_sun, Z = 1e-4..0.04,
X = 0.5..0.8, alpha_mlt = 0.5..3; outside it :func:`solve_star` refuses with
a ConfigError.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import solve_banded

from radwalk import constants as const
from radwalk.errors import ConfigError, ModelError
from radwalk.physics.structure.equations import LN_R, LUM, N_VAR, Physics, point_state, residuals
from radwalk.physics.structure.guess import extrapolated_start, homology_start, ionised_gas_state, polytrope_start
from radwalk.physics.structure.mesh import mass_mesh

__all__ = ["StarStructure", "solve_star", "solve_masses", "solve_metallicities", "MASS_RANGE", "Z_RANGE",
           "X_RANGE", "ALPHA_RANGE"]

MASS_RANGE = (0.5, 20.0)  # M_sun, validated by the ZAMS tests
Z_RANGE = (1e-4, 0.04)
X_RANGE = (0.5, 0.8)
ALPHA_RANGE = (0.5, 3.0)

_BAND = 5  # sub- and super-diagonals of the Jacobian
_LOG_STEP = 1e-7  # finite-difference step of a log unknown
_LUM_STEP = 1e-7  # finite-difference step of L / L_scale, times max(|l|, 1e-3)
_MAX_LOG_CHANGE = 0.5  # damping: largest change of a log unknown per iteration
_MAX_HALVINGS = 8
_STAGE1_TOL = 1e-4  # the fully ionised first stage needs no tight convergence


@dataclass
class StarStructure:
    """A solved stellar model; arrays [n] from the centre (0) to the photosphere (-1).

    Attributes
    ----------
    m : ndarray [n], g
    r : ndarray [n], cm
    rho : ndarray [n], g/cm^3
    T : ndarray [n], K
    P : ndarray [n], dyn/cm^2
    L : ndarray [n], erg/s
    X : ndarray [n]
        Hydrogen mass fraction.
    eps : ndarray [n], erg/(g s)
        Energy generation rate (nuclear, plus any extra source given).
    kappa : ndarray [n], cm^2/g
    nabla, nabla_rad, nabla_ad : ndarray [n]
        Actual, radiative and adiabatic temperature gradients dlnT/dlnP.
    convective : ndarray [n] of bool
        nabla_rad > nabla_ad (Schwarzschild).
    v_conv : ndarray [n], cm/s
        Mixing-length convective velocity (0 in radiative layers).
    conv_flux_fraction : ndarray [n]
        Share of the energy flux carried by convection, 1 - nabla / nabla_rad.
    H_P : ndarray [n], cm
        Pressure scale height P / (rho g); at the centre, where it diverges,
        the finite sqrt(P / (G rho^2)) is reported instead.
    c_P : ndarray [n], erg/(g K)
    delta, Gamma_1, mu : ndarray [n]
    u : ndarray [n], erg/g
        Specific internal energy from the EOS.
    g : ndarray [n], cm/s^2
        Local gravity G m / r^2.
    M, R, L_surface, T_eff, T_c, rho_c, P_c : float
        Mass (g), photospheric radius (cm), luminosity (erg/s), effective
        temperature (K), central temperature (K), density (g/cm^3) and
        pressure (dyn/cm^2).
    alpha_mlt : float
    iterations : int
        Newton iterations used.
    Z : float
    max_residual : float
        Largest residual of the difference equations at the solution.
    """

    m: np.ndarray
    r: np.ndarray
    rho: np.ndarray
    T: np.ndarray
    P: np.ndarray
    L: np.ndarray
    X: np.ndarray
    eps: np.ndarray
    kappa: np.ndarray
    nabla: np.ndarray
    nabla_rad: np.ndarray
    nabla_ad: np.ndarray
    convective: np.ndarray
    v_conv: np.ndarray
    conv_flux_fraction: np.ndarray
    H_P: np.ndarray
    c_P: np.ndarray
    delta: np.ndarray
    Gamma_1: np.ndarray
    mu: np.ndarray
    u: np.ndarray
    g: np.ndarray
    M: float
    R: float
    L_surface: float
    T_eff: float
    T_c: float
    rho_c: float
    P_c: float
    alpha_mlt: float
    iterations: int
    Z: float
    max_residual: float = 0.0
    cpu_seconds: float = field(default=0.0, compare=False)

    # ------------------------------------------------------------------ zones
    @property
    def q(self) -> np.ndarray:
        """Mass fraction m / M, [n]."""
        return self.m / self.M

    def _boundary(self, i_out, i_in, coord):
        """Interpolated zero of nabla_rad - nabla_ad between points i_in (unstable) and i_out."""
        w = self.nabla_rad - self.nabla_ad
        a, b = w[i_in], w[i_out]
        t = a / (a - b) if a != b else 0.5
        return coord[i_in] + t * (coord[i_out] - coord[i_in])

    def convective_core_mass_fraction(self) -> float:
        """Mass fraction of the convective core (0 when the centre is radiative).

        Returns
        -------
        float
            q at the outer edge of the convective region containing the
            centre, where nabla_rad = nabla_ad (linearly interpolated).
        """
        if not self.convective[0]:
            return 0.0
        rad = np.flatnonzero(~self.convective)
        if rad.size == 0:
            return 1.0
        i = rad[0]
        return float(self._boundary(i, i - 1, self.q))

    def _envelope_base_index(self):
        # Base of the outermost convection zone.  A zone that contains the
        # centre is a convective core, unless it reaches to within 1 % of the
        # mass from the surface: then the star is fully convective (base 0).
        conv = np.flatnonzero(self.convective)
        if conv.size == 0:
            return None
        top = conv[-1]
        below = np.flatnonzero(~self.convective[:top])
        if below.size:
            return below[-1] + 1
        return 0 if 1.0 - self.q[top] < 0.01 else None

    def envelope_base_radius(self) -> float:
        """Base of the outermost convection zone, r / R (1 when there is none).

        Returns
        -------
        float
            r_b / R where nabla_rad = nabla_ad (linearly interpolated); 0 for a
            fully convective star.  A thin surface zone (e.g. the hydrogen
            ionisation zone of a hot star) counts as the outermost zone.
        """
        b = self._envelope_base_index()
        if b is None:
            return 1.0
        if b == 0:
            return 0.0
        return float(self._boundary(b - 1, b, self.r) / self.R)

    def envelope_base_mass_fraction(self) -> float:
        """Mass fraction q at the base of the outermost convection zone (1 when none)."""
        b = self._envelope_base_index()
        if b is None:
            return 1.0
        if b == 0:
            return 0.0
        return float(self._boundary(b - 1, b, self.q))

    def local_turnover_time(self) -> float:
        """Local convective turnover time at the base of the convective envelope, s.

        Returns
        -------
        float
            alpha H_P / v_conv (the mixing length over the convective
            velocity) at half a pressure scale height above the envelope base,
            r_b + H_P(r_b) / 2, interpolated linearly in r; NaN when the star has
            no convective envelope.
        """
        b = self._envelope_base_index()
        if b is None:
            return math.nan
        r_b = self.envelope_base_radius() * self.R
        h_b = np.interp(r_b, self.r, self.H_P)
        r_x = min(r_b + 0.5 * h_b, self.r[-1])
        zone = slice(b, None)
        hp = np.interp(r_x, self.r[zone], self.H_P[zone])
        v = np.interp(r_x, self.r[zone], self.v_conv[zone])
        return float(self.alpha_mlt * hp / v) if v > 0.0 else math.nan

    def _crossing(self, sel) -> float:
        both = sel[1:] & sel[:-1] & (self.v_conv[1:] > 0.0) & (self.v_conv[:-1] > 0.0)
        if not both.any():
            return math.nan
        inv = np.where(self.v_conv > 0.0, 1.0 / np.where(self.v_conv > 0.0, self.v_conv, 1.0), 0.0)
        return float(np.sum((0.5 * (inv[1:] + inv[:-1]) * np.diff(self.r))[both]))

    def global_turnover_time(self) -> float:
        """Integral of dr / v_conv over the convective envelope, s (NaN when none).

        Notes
        -----
        Trapezoid over mesh intervals with both ends convective; the sliver
        between the last convective point and the zone boundary, where v -> 0
        and 1/v has an integrable singularity, is left out.
        """
        b = self._envelope_base_index()
        if b is None:
            return math.nan
        sel = np.zeros(self.m.size, bool)
        sel[b:] = self.convective[b:]
        return self._crossing(sel)

    def convective_crossing_time(self, zone: str = "all") -> float:
        """Integral of dr / v_conv over convective layers, s (NaN when there are none).

        Parameters
        ----------
        zone : {"all", "core", "envelope"}
            Every convective layer, the convective core only, or the
            outermost convection zone only.
        """
        if zone == "all":
            return self._crossing(self.convective.copy())
        if zone == "envelope":
            return self.global_turnover_time()
        if zone == "core":
            if not self.convective[0]:
                return math.nan
            rad = np.flatnonzero(~self.convective)
            sel = np.zeros(self.m.size, bool)
            sel[: rad[0] if rad.size else None] = True
            return self._crossing(sel)
        raise ConfigError(f"zone must be 'all', 'core' or 'envelope', got {zone!r}")

    # -------------------------------------------------------------- energies
    def gravitational_energy(self) -> float:
        """Omega = -integral G m / r dm, erg (trapezoid on the mesh; m / r -> 0 at the centre)."""
        m_over_r = np.where(self.r > 0.0, self.m / np.where(self.r > 0.0, self.r, 1.0), 0.0)
        return float(-const.G * np.sum(0.5 * (m_over_r[1:] + m_over_r[:-1]) * np.diff(self.m)))

    def internal_energy(self) -> float:
        """U = integral u dm, erg (u from the EOS: thermal, radiation and ionisation energy)."""
        return float(np.sum(0.5 * (self.u[1:] + self.u[:-1]) * np.diff(self.m)))

    def virial_pressure_integral(self) -> float:
        """3 integral P / rho dm, erg; equals -Omega in hydrostatic equilibrium (virial theorem, KWW 2012 ch. 3)."""
        f = self.P / self.rho
        return float(3.0 * np.sum(0.5 * (f[1:] + f[:-1]) * np.diff(self.m)))

    def thermal_time(self) -> float:
        """Energy-transport (thermal) time U / L, s."""
        return self.internal_energy() / self.L_surface

    def kelvin_helmholtz_time(self) -> float:
        """Kelvin-Helmholtz time |Omega| / L from the solved gravitational energy, s."""
        return -self.gravitational_energy() / self.L_surface

    def dynamical_time(self) -> float:
        """Free-fall style dynamical time sqrt(R^3 / (G M)), s."""
        return math.sqrt(self.R**3 / (const.G * self.M))

    def photon_diffusion_time(self, radiative_only: bool = False) -> float:
        """Photon diffusion time (1/c) integral kappa rho r dr, s.

        Parameters
        ----------
        radiative_only : bool
            If True, only radiative layers contribute (for a star with a
            convective envelope: the radiative core; the thin radiative
            photospheric layer adds a negligible amount).

        Notes
        -----
        The mean first-passage time from the centre for a diffusion
        coefficient D = c / (3 kappa rho) (radwalk DESIGN sect. 5); trapezoid
        in r on the mesh, an interval counted when both ends are radiative.
        """
        f = self.kappa * self.rho * self.r
        terms = 0.5 * (f[1:] + f[:-1]) * np.diff(self.r)
        if radiative_only:
            rad = ~self.convective
            terms = terms[rad[1:] & rad[:-1]]
        return float(np.sum(terms) / const.C)


# ---------------------------------------------------------------------- solver
def _physics(kappa, alpha, eos=None, nuclear=None) -> Physics:
    """The project's EOS and nuclear rates unless replacements are given."""
    if eos is None:
        from radwalk.physics.structure.eos import eos_state as eos
    if nuclear is None:
        from radwalk.physics.nuclear import nuclear_rates as nuclear
    return Physics(eos=eos, nuclear=nuclear, kappa=kappa, alpha=float(alpha))


def _check_inputs(M, X, Z, alpha, n_mesh, X_profile):
    m = M / const.M_SUN
    if not (math.isfinite(m) and MASS_RANGE[0] <= m <= MASS_RANGE[1]):
        raise ConfigError(f"mass {m:.4g} M_sun is outside the solver's validated range "
                          f"{MASS_RANGE[0]}..{MASS_RANGE[1]} M_sun")
    if not (math.isfinite(Z) and Z_RANGE[0] <= Z <= Z_RANGE[1]):
        raise ConfigError(f"Z = {Z:g} is outside the solver's validated range {Z_RANGE[0]:g}..{Z_RANGE[1]:g}")
    if not (math.isfinite(X) and X_RANGE[0] <= X <= X_RANGE[1]):
        raise ConfigError(f"X = {X:g} is outside the solver's validated range {X_RANGE[0]:g}..{X_RANGE[1]:g}")
    if not (ALPHA_RANGE[0] <= alpha <= ALPHA_RANGE[1]):
        raise ConfigError(f"alpha_mlt = {alpha:g} is outside the validated range {ALPHA_RANGE[0]}..{ALPHA_RANGE[1]}")
    if X_profile is not None:
        xp = np.asarray(X_profile, dtype=float)
        if xp.shape != (n_mesh,):
            raise ConfigError(f"X_profile must have shape ({n_mesh},) to match n_mesh, got {xp.shape}")
        if not (np.all(np.isfinite(xp)) and np.all(xp >= 0.0) and np.all(xp + Z <= 1.0)):
            raise ConfigError("X_profile must hold mass fractions with 0 <= X and X + Z <= 1")


def _fill_band(D, h, n):
    """Banded Jacobian (solve_banded layout, 5 + 5 bands) from the 8 perturbed residual differences.

    D : [8, 4n] residual change of model 1 + 2 j + p (unknown j perturbed at points of parity p).
    h : [n, 4] perturbation sizes.
    """
    nn = N_VAR * n
    ab = np.zeros((2 * _BAND + 1, nn))
    cols = np.arange(nn)
    point = cols // N_VAR
    var = cols % N_VAR
    model = 2 * var + (point % 2)
    hcol = h.reshape(-1)
    for o in range(-_BAND, _BAND + 1):  # o = row - column
        rows = cols + o
        ok = (rows >= 0) & (rows < nn) & (o >= -2 - var) & (o <= 5 - var)
        c = cols[ok]
        ab[_BAND + o, c] = D[model[ok], rows[ok]] / hcol[ok]
    # solve_banded's layout: ab[u + i - j, j] = a[i, j] with u = _BAND; row index i - j = o.
    return ab


def _newton(x, m, X, Z, L_scale, physics, tol, max_iter, eps_extra, label):
    n = x.shape[0]
    centre_r = x[0, LN_R]
    cache = {}
    res_tol = max(tol, 1e-6)
    par = np.arange(n) % 2
    F = None
    x_prev = dx = None
    damp = 1.0
    halvings = 0
    it = 0
    while it < max_iter:
        it += 1
        h = np.full((n, N_VAR), _LOG_STEP)
        h[:, LUM] = _LUM_STEP * np.maximum(np.abs(x[:, LUM]), 1e-3)
        xs = np.repeat(x[None], 2 * N_VAR + 1, axis=0)
        for j in range(N_VAR):
            for p in (0, 1):
                xs[1 + 2 * j + p, par == p, j] += h[par == p, j]
        try:
            Fs, _ = residuals(xs, m, X, Z, L_scale, physics, centre_r, eps_extra, cache=cache)
            base_ok = np.all(np.isfinite(Fs[0]))
        except ModelError:
            Fs, base_ok = None, False
        if not base_ok:
            # The last step led to a non-finite model: go back and take half of it.
            if x_prev is None:
                raise ModelError(f"{label}: the starting model gives non-finite residuals")
            halvings += 1
            if halvings > _MAX_HALVINGS:
                raise ModelError(f"{label}: no finite model along the Newton step at iteration {it}")
            damp *= 0.5
            x = x_prev + damp * dx
            continue
        halvings = 0
        F = Fs[0]
        if not np.all(np.isfinite(Fs)):
            raise ModelError(f"{label}: non-finite residuals in the Jacobian at iteration {it}")
        ab = _fill_band(Fs[1:] - F, h, n)
        try:
            step = solve_banded((_BAND, _BAND), ab, -F, check_finite=False).reshape(n, N_VAR)
        except (np.linalg.LinAlgError, ValueError) as exc:
            raise ModelError(f"{label}: singular Jacobian at iteration {it} ({exc})") from None
        if not np.all(np.isfinite(step)):
            raise ModelError(f"{label}: non-finite Newton correction at iteration {it}")
        l_unit = max(abs(x[-1, LUM]), 1e-3)
        corr = max(np.max(np.abs(step[:, :LUM])), np.max(np.abs(step[:, LUM])) / l_unit)
        damp = min(1.0, _MAX_LOG_CHANGE / max(np.max(np.abs(step[:, :LUM])), 1e-300))
        x_prev, dx = x, step
        x = x + damp * step
        if damp == 1.0 and corr < tol:
            # Converged corrections: confirm with the residuals of the corrected model alone.
            try:
                F_new, _ = residuals(x[None], m, X, Z, L_scale, physics, centre_r, eps_extra, cache=cache)
            except ModelError:
                F_new = np.full((1, 1), np.nan)
            fnew = float(np.max(np.abs(F_new)))
            if fnew < res_tol:
                return x, it, fnew
    if F is None:
        raise ModelError(f"{label}: no finite model in {max_iter} iterations")
    row = int(np.argmax(np.abs(F)))
    if row < 2:
        where = "centre"
    elif row >= N_VAR * n - 2:
        where = "photosphere"
    else:
        k, e = divmod(row - 2, N_VAR)
        name = ("radius", "pressure", "temperature", "luminosity")[e]
        where = f"interval {k} ({name} equation, m/M = {m[k] / m[-1]:.3g})"
    raise ModelError(f"{label}: no convergence in {max_iter} iterations; largest residual {np.max(np.abs(F)):.3g} "
                     f"at {where}")


def solve_star(M, X, Z, kappa, *, alpha_mlt=1.8, X_profile=None, guess=None, n_mesh=400, tol=1e-8,
               max_iter=40, eps_extra=None, eos=None, nuclear=None) -> StarStructure:
    """Solve the structure of a star in thermal and hydrostatic equilibrium.

    Parameters
    ----------
    M : float, g
        Mass, 0.5-20 M_sun.
    X, Z : float
        Hydrogen and metal mass fractions (X 0.5-0.8, Z 1e-4..0.04); Y = 1 - X - Z.
    kappa : callable
        Opacity ``kappa(rho, T, X, Z)`` in cm^2/g, broadcasting.
    alpha_mlt : float
        Mixing-length parameter (0.5-3).
    X_profile : ndarray [n_mesh], optional
        Hydrogen mass fraction against the mesh's m / M (for evolution);
        default X everywhere.
    guess : StarStructure or (StarStructure, StarStructure), optional
        A solved model of a nearby mass (and/or composition), scaled by
        homology; or two solved models of different mass (older, newer),
        extrapolated linearly in ln M.  Default: an n = 3 polytrope, relaxed
        first with a fully ionised gas and then with the real EOS.
    n_mesh : int
        Number of mesh points.
    tol : float
        Largest Newton correction (log unknowns, and L relative to the
        surface value) at convergence; the residuals must also be below
        max(tol, 1e-6).
    max_iter : int
        Newton iterations before giving up.
    eps_extra : ndarray [n_mesh], erg/(g s), optional
        Energy source added to the nuclear rate (for evolution: -T ds/dt).
    eos, nuclear : callable, optional
        Replacements for :func:`radwalk.physics.structure.eos.eos_state` and
        :func:`radwalk.physics.nuclear.nuclear_rates` with the same
        signatures (used by tests of idealised stars).

    Returns
    -------
    StarStructure

    Raises
    ------
    ConfigError
        If an input is outside the validated range.
    ModelError
        If Newton's method does not converge within ``max_iter`` iterations
        or meets non-finite values; the message names mass, composition,
        iterations and the largest residual with its place.
    """
    import time

    t0 = time.process_time()
    M = float(M)
    X = float(X)
    Z = float(Z)
    _check_inputs(M, X, Z, alpha_mlt, int(n_mesh), X_profile)
    physics = _physics(kappa, alpha_mlt, eos, nuclear)
    q = mass_mesh(n_mesh)
    m = q * M
    Xp = np.full(q.size, X) if X_profile is None else np.asarray(X_profile, dtype=float)
    extra = None if eps_extra is None else np.asarray(eps_extra, dtype=float)
    label = f"structure of M = {M / const.M_SUN:.4g} M_sun, X = {X:.4g}, Z = {Z:.4g}"
    first = 0
    if guess is None:
        x, L_scale = polytrope_start(M, q, Xp, Z, physics)
        # Stage 1: relax the polytrope with a fully ionised gas, whose smooth outer layers Newton's
        # method handles from a poor start; the real EOS then starts from that model.
        simple = Physics(eos=ionised_gas_state, nuclear=physics.nuclear, kappa=kappa, alpha=physics.alpha)
        x, first, _ = _newton(x, m, Xp, Z, L_scale, simple, _STAGE1_TOL, max_iter, extra,
                              label + " (fully ionised start)")
    elif isinstance(guess, tuple):
        x, L_scale = extrapolated_start(guess[0], guess[1], M, q)
    else:
        x, L_scale = homology_start(guess, M, q)
    x, iterations, fmax = _newton(x, m, Xp, Z, L_scale, physics, tol, max_iter, extra, label)
    iterations += first
    star = _build(x, m, Xp, Z, L_scale, physics, extra, iterations, fmax)
    star.cpu_seconds = time.process_time() - t0
    return star


def _build(x, m, X, Z, L_scale, physics, extra, iterations, fmax) -> StarStructure:
    s = point_state(x[None], m, X, Z, L_scale, physics, extra)
    st = s.eos
    one = {k: np.asarray(v)[0] if np.ndim(v) == 2 else np.asarray(v) for k, v in s._asdict().items() if k != "eos"}
    e = {k: np.broadcast_to(getattr(st, k), s.rho.shape)[0].copy() for k in
         ("c_P", "delta", "Gamma_1", "mu", "u")}
    g = one["g"]
    with np.errstate(divide="ignore"):
        H_P = np.where(g > 0.0, one["P"] / (one["rho"] * np.where(g > 0.0, g, 1.0)),
                       np.sqrt(one["P"] / (const.G * one["rho"] ** 2)))
    R = float(one["r"][-1])
    L_s = float(one["L"][-1])
    star = StarStructure(
        m=m.copy(), r=one["r"], rho=one["rho"], T=one["T"], P=one["P"], L=one["L"], X=np.asarray(X, float).copy(),
        eps=one["eps"], kappa=one["kappa"], nabla=one["nabla"], nabla_rad=one["nabla_rad"],
        nabla_ad=one["nabla_ad"], convective=one["convective"].astype(bool), v_conv=one["v_conv"],
        conv_flux_fraction=one["conv_flux_fraction"], H_P=H_P, g=g, **e,
        M=float(m[-1]), R=R, L_surface=L_s, T_eff=float((L_s / (4.0 * math.pi * const.SIGMA_SB * R * R)) ** 0.25),
        T_c=float(one["T"][0]), rho_c=float(one["rho"][0]), P_c=float(one["P"][0]), alpha_mlt=physics.alpha,
        iterations=int(iterations), Z=float(Z), max_residual=float(fmax),
    )
    arrays = [v for v in vars(star).values() if isinstance(v, np.ndarray)]
    if not all(np.all(np.isfinite(a)) for a in arrays if a.dtype != bool):
        raise ModelError(f"structure of M = {star.M / const.M_SUN:.4g} M_sun: non-finite values in the solved model")
    return star


def solve_masses(masses, X, Z, kappa, *, start=None, max_split=4, **kwargs) -> list[StarStructure]:
    """Solve a list of masses by continuation, each started from the previous.

    Parameters
    ----------
    masses : sequence of float, g
        Masses in the order to solve them (a smooth sequence, e.g. increasing).
    X, Z : float
    kappa : callable
    start : StarStructure, optional
        Model to start the first mass from (default: polytrope).
    max_split : int
        If a step fails, it is retried through up to 2**max_split - 1
        intermediate masses (geometric) before giving up.
    **kwargs
        Passed to :func:`solve_star`.

    Returns
    -------
    list of StarStructure
        One per mass, same order.

    Raises
    ------
    ModelError
        If a mass cannot be reached.
    """
    out = []
    prev = start
    for M in masses:
        # With two solved neighbours, extrapolate linearly in ln M; else scale one by homology.
        older = out[-2] if len(out) >= 2 else None
        prev = _reach(prev, lambda g, mm, older=older: _solve_from(g, older, mm, X, Z, kappa, kwargs), M,
                      lambda s: s.M, max_split)
        out.append(prev)
    return out


def _solve_from(newer, older, M, X, Z, kappa, kwargs):
    if newer is not None and older is not None and older.M != newer.M and older.Z == newer.Z \
            and older.m.size == newer.m.size:
        try:
            return solve_star(M, X, Z, kappa, guess=(older, newer), **kwargs)
        except ModelError:
            pass
    return solve_star(M, X, Z, kappa, guess=newer, **kwargs)


def _reach(prev, solve, target, value_of, max_split, geometric=True):
    try:
        return solve(prev, target)
    except ModelError:
        if prev is None or max_split <= 0:
            raise
    a = value_of(prev)
    mid = math.sqrt(a * target) if geometric else 0.5 * (a + target)
    half = _reach(prev, solve, mid, value_of, max_split - 1, geometric)
    return _reach(half, solve, target, value_of, max_split - 1, geometric)


def solve_metallicities(M, X, Z_values, kappa, *, start=None, max_split=4, **kwargs) -> list[StarStructure]:
    """Solve one mass at a list of metallicities by continuation in Z.

    Parameters
    ----------
    M : float, g
    X : float
    Z_values : sequence of float
        Metallicities in the order to solve them.
    kappa : callable
    start : StarStructure, optional
        Model to start the first metallicity from (default: polytrope).
    max_split : int
        Failed steps are retried through intermediate Z (geometric), as in
        :func:`solve_masses`.
    **kwargs
        Passed to :func:`solve_star`.

    Returns
    -------
    list of StarStructure
    """
    out = []
    prev = start
    for Z in Z_values:
        prev = _reach(prev, lambda g, zz: solve_star(M, X, zz, kappa, guess=g, **kwargs), Z,
                      lambda s: s.Z, max_split)
        out.append(prev)
    return out
