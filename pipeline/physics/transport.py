"""Radiative-transport quantities of a profile under an opacity law.

Everything is vectorised over the leading sample axis of a
:class:`radwalk.host.components.Profile`.  Definitions (cgs):

* mean free path lambda = 1 / (kappa rho);
* optical depth tau(r) = integral_r^R kappa rho dr, photosphere at tau = 2/3;
* photon diffusion time: the mean first-passage time of a photon from the
  centre to the surface.  With the diffusion coefficient D = c / (3 kappa rho)
  (an isotropic walk with <l^2> = 2 lambda^2), solving div(D grad t) = -1
  with t(R) = 0 gives t_diff = (1/c) integral_0^R kappa rho r dr;
* ``diffusion_time_radiative_core``: the same integral through the radiative
  zone alone, from the edge of a convective core (or the centre) to the base
  of the convective envelope (or the surface).  Photons do not skip convective
  layers; there the energy moves with the gas, which the convective crossing
  time, the integral of dr / v_conv over convective layers, measures when the
  profile carries mixing-length velocities;
* the energy-transport (thermal) time U / L, U the internal energy: how long
  the star's heat content takes to leave at its luminosity.  It is ~100 times
  the photon diffusion time, because the photons that carry the energy are
  absorbed and re-emitted on the way, and what random-walks out is the
  radiation field, which holds only a small fraction (~a T^4 / (3/2 n k T),
  ~1e-3 in the Sun) of the energy the gas stores;
* the uniform-density estimate R^2 kappa_mean rho_mean / c (tau^2 steps of
  lambda; the mean first-passage time of a uniform sphere is half of it);
* Kelvin-Helmholtz time |Omega| / (2 L): the thermal energy of an ideal
  monatomic gas in virial equilibrium, -Omega/2, over the luminosity, with
  Omega = -integral G m dm / r from the profile (for a polytrope
  -3/(5-n) G M^2/R).  Other texts use G M^2/(R L) (larger by 4/3 for n = 3);
* dynamical time sqrt(R^3 / (G M));
* Eddington luminosity 4 pi G M c / kappa_es with the Thomson opacity;
* convective layers by the Schwarzschild criterion nabla_rad > nabla_ad, with
  nabla_rad = 3 kappa L(r) P / (16 pi a c G m T^4), L(r) from pp + CNO energy
  generation (:mod:`radwalk.physics.nuclear`) over the profile scaled to the
  star's luminosity, and nabla_ad of a gas + radiation mixture with
  gas-pressure fraction beta.  A profile that solved the energy equation
  (a solved star) brings its own L(r), convective flags, velocities and
  internal energy, and those are used instead.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from radwalk import constants as k
from radwalk.host.components import Profile
from radwalk.physics.nuclear import nuclear_rates

PHOTOSPHERE_TAU = 2.0 / 3.0


@dataclass
class Transport:
    """Transport quantities of n samples: scalars ``[n]`` and fields ``[n, ngrid]``.

    The scalars' names, units and words are in :data:`radwalk.forward.quantities.CATALOGUE`.
    """

    scalars: dict
    fields: dict
    convective: np.ndarray  # bool [n, ngrid]

    def zones(self, i: int, r_rel: np.ndarray) -> list[list[float]]:
        """Convective zones of sample i as [inner, outer] in r/R."""
        return convective_zones(self.convective[i], r_rel)


def cumulative(y, x):
    """Trapezoid cumulative integral along the last axis, starting at 0."""
    out = np.zeros(np.broadcast(y, x).shape)
    out[..., 1:] = np.cumsum(0.5 * (y[..., 1:] + y[..., :-1]) * np.diff(x, axis=-1), axis=-1)
    return out


def nabla_ad(beta):
    """Adiabatic gradient of an ideal gas + radiation mixture (0.4 at beta = 1, 0.25 at beta -> 0)."""
    g = (1.0 - beta) * (4.0 + beta) / beta**2
    return (1.0 + g) / (2.5 + 4.0 * g)


def convective_zones(mask, r_rel):
    """Contiguous convective runs of a boolean mask as [[inner, outer], ...] in r/R."""
    zones = []
    idx = np.flatnonzero(np.diff(np.concatenate([[0], mask.astype(int), [0]])))
    for start, stop in zip(idx[::2], idx[1::2]):
        inner = 0.0 if start == 0 else 0.5 * (r_rel[start - 1] + r_rel[start])
        outer = 1.0 if stop == mask.size else 0.5 * (r_rel[stop - 1] + r_rel[stop])
        zones.append([float(inner), float(outer)])
    return zones


def photosphere(r, tau):
    """Radius where the inward optical depth reaches 2/3, per sample (cm)."""
    n = r.shape[0]
    below = tau < PHOTOSPHERE_TAU  # outermost points
    j = np.argmax(below, axis=1)  # first index with tau < 2/3
    j = np.clip(j, 1, r.shape[1] - 1)
    rows = np.arange(n)
    t0, t1 = tau[rows, j - 1], tau[rows, j]
    r0, r1 = r[rows, j - 1], r[rows, j]
    w = np.clip((t0 - PHOTOSPHERE_TAU) / np.where(t0 > t1, t0 - t1, 1.0), 0.0, 1.0)
    out = r0 + w * (r1 - r0)
    # A star thinner than tau = 2/3 through its centre has no photosphere inside it.
    return np.where(tau[:, 0] >= PHOTOSPHERE_TAU, out, 0.0)


def compute(profile: Profile, opacity, L) -> Transport:
    """All transport quantities for a profile, a bound opacity law and luminosities L [n] (erg/s)."""
    p = profile
    # An evolved star's hydrogen varies through it; opacity and burning see the local value.
    X2 = p.X[:, None] if p.X_profile is None else np.asarray(p.X_profile, dtype=float)
    Z2 = p.Z[:, None]
    L = np.asarray(L, dtype=float)
    kappa = opacity(p.rho, p.T, p.X if p.X_profile is None else X2, p.Z)
    with np.errstate(divide="ignore", over="ignore"):
        krho = kappa * p.rho
        mfp = 1.0 / krho
    r = p.r
    # optical depth inward from the outermost grid point
    tau_from_centre = cumulative(krho, r)
    tau = tau_from_centre[:, -1:] - tau_from_centre
    t_cum = cumulative(krho * r, r) / k.C  # first-passage time from the centre to r, s

    eps = nuclear_rates(p.rho, p.T, X2, Z2).eps
    if p.L is not None:
        # A solved star: its own luminosity profile.
        Lr = np.asarray(p.L, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            lm = np.where(p.m > 0, Lr / np.where(p.m > 0, p.m, 1.0), eps)
    else:
        # luminosity profile from energy generation, scaled to the star's L
        Lcum = cumulative(eps, p.m)
        total = Lcum[:, -1:]
        # Where the profile is too cool to burn anything, spread L over the mass instead.
        share = np.where(total > 0, Lcum / np.where(total > 0, total, 1.0), p.m / p.M[:, None])
        Lr = L[:, None] * share
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            lm = Lr / p.m
            # centre: L(r)/m(r) tends to the local L per unit mass
            lm[:, 0] = np.where(total[:, 0] > 0, L * eps[:, 0] / np.where(total[:, 0] > 0, total[:, 0], 1.0),
                                L / p.M)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        grad_rad = 3.0 * kappa * lm * p.P / (16.0 * np.pi * k.A_RAD * k.C * k.G * p.T**4)
    grad_ad = nabla_ad(p.beta)
    conv = grad_rad > grad_ad if p.convective is None else np.asarray(p.convective, dtype=bool)

    dm = np.diff(p.m, axis=1)
    conv_mid = conv[:, 1:] & conv[:, :-1]
    conv_mass = (dm * conv_mid).sum(axis=1) / p.M

    r_rel = r / p.R[:, None]
    core = np.where(conv[:, 0], _first_false_edge(conv, r_rel), 0.0)
    env = np.where(conv[:, -1], _last_false_edge(conv, r_rel), 1.0)
    if "convective_envelope_base_radius" in p.scalars:
        # A solved star knows its envelope base better (its photosphere sits in a thin radiative layer
        # above the convection zone, which the surface-point test above would miss).
        env = np.asarray(p.scalars["convective_envelope_base_radius"], dtype=float)
    # The radiative zone: outside a convective core, inside the convective envelope.
    radiative_zone = ~conv & (r_rel >= core[:, None]) & (r_rel <= env[:, None])
    rad_integrand = np.where(radiative_zone, krho * r, 0.0)
    if p.v_conv is not None:
        v = np.asarray(p.v_conv, dtype=float)
        moving = conv & (v > 0)
        inv_v = np.where(moving, 1.0 / np.where(moving, v, 1.0), 0.0)
        crossing = cumulative(inv_v, r)[:, -1] / k.YEAR
        crossing = np.where(moving.any(axis=1), crossing, np.nan)
    else:
        crossing = np.full(p.n, np.nan)  # a model without convective velocities
    if p.u is not None:
        u = np.asarray(p.u, dtype=float)
    else:
        # ideal monatomic gas plus radiation: u = (3/2 P_gas + 3 P_rad) / rho
        u = (1.5 * p.beta + 3.0 * (1.0 - p.beta)) * p.P / p.rho
    internal_energy = cumulative(u, p.m)[:, -1]
    m_rel = p.m / p.M[:, None]
    core_mass = np.where(conv[:, 0], _first_false_edge(conv, m_rel), 0.0)
    mass_w = np.diff(p.m, axis=1)
    kappa_mid = 0.5 * (kappa[:, 1:] + kappa[:, :-1])
    kappa_mean = (kappa_mid * mass_w).sum(axis=1) / mass_w.sum(axis=1)
    rho_mean = 3.0 * p.M / (4.0 * np.pi * p.R**3)

    omega = -cumulative(k.G * p.m * 4.0 * np.pi * p.rho * r, r)[:, -1]

    kappa_es = k.SIGMA_T * (1.0 + p.X) / (2.0 * k.M_U)
    L_edd = 4.0 * np.pi * k.G * p.M * k.C / kappa_es
    scalars = {
        "central_density": p.rho[:, 0],
        "central_temperature": p.T[:, 0],
        "central_pressure": p.P[:, 0],
        "central_hydrogen": np.broadcast_to(X2, p.rho.shape)[:, 0].copy(),
        "mean_free_path_center": mfp[:, 0],
        "photosphere_radius": photosphere(r, tau),
        "diffusion_time": t_cum[:, -1] / k.YEAR,
        "diffusion_time_radiative_core": cumulative(rad_integrand, r)[:, -1] / k.C / k.YEAR,
        "convective_crossing_time": crossing,
        "energy_transport_time": internal_energy / L / k.YEAR,
        "diffusion_time_uniform": p.R**2 * kappa_mean * rho_mean / k.C / k.YEAR,
        "kelvin_helmholtz_time": np.abs(omega) / (2.0 * L) / k.YEAR,
        "dynamical_time": np.sqrt(p.R**3 / (k.G * p.M)),
        "eddington_luminosity": L_edd,
        "eddington_ratio": L / L_edd,
        "core_convective_radius": core,
        "convective_envelope_base_radius": env,
        "convective_mass_fraction": conv_mass,
        "convective_core_mass_fraction": core_mass,
        "convective_envelope_base_mass_fraction": _mass_at(env, r_rel, m_rel),
        "convective_turnover_time": np.full(p.n, np.nan),
        "convective_turnover_time_global": np.full(p.n, np.nan),
    }
    # Model-specific scalars (a solved star's turnover times) replace the placeholders.
    scalars.update({name: np.asarray(v, dtype=float) for name, v in p.scalars.items()})
    fields = {
        "kappa": kappa,
        "mean_free_path": mfp,
        "tau": tau,
        "diffusion_time_cumulative": t_cum / k.YEAR,
        "luminosity": Lr,
        "nabla_rad": grad_rad,
        "nabla_ad": grad_ad,
        "eps_nuclear": eps,
    }
    if p.nabla is not None:
        fields["nabla"] = np.asarray(p.nabla, dtype=float)
    if p.v_conv is not None:
        fields["v_conv"] = np.asarray(p.v_conv, dtype=float)
    return Transport(scalars, fields, conv)


def _mass_at(x, r_rel, m_rel):
    """m/M at r/R = x [n] of each sample, linear between grid points (1 at or above the surface)."""
    return np.array([np.interp(xi, ri, mi) for xi, ri, mi in zip(x, r_rel, m_rel)])


def _first_false_edge(mask, r_rel):
    """r/R between the last convective point of a central run and the next one."""
    j = np.argmin(mask, axis=1)  # first radiative index
    j = np.where(mask.all(axis=1), mask.shape[1] - 1, j)
    rows = np.arange(mask.shape[0])
    return np.where(mask.all(axis=1), 1.0, 0.5 * (r_rel[rows, j - 1] + r_rel[rows, j]))


def _last_false_edge(mask, r_rel):
    """r/R between the last radiative point below a surface run and the first convective one."""
    rev = mask[:, ::-1]
    j_rev = np.argmin(rev, axis=1)  # first radiative index counted from the surface
    j = mask.shape[1] - j_rev  # first convective index of the surface run
    j = np.clip(j, 1, mask.shape[1] - 1)
    rows = np.arange(mask.shape[0])
    return np.where(mask.all(axis=1), 0.0, 0.5 * (r_rel[rows, j - 1] + r_rel[rows, j]))
