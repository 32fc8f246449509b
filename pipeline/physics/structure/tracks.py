"""A main-sequence track resampled on its evolutionary phase, with every scalar a fit reports.

Tracks of different mass take very different times, and the steps of
:func:`radwalk.physics.structure.evolution.evolve` fall at different ages on
each; to interpolate between tracks, every track is put on a common
coordinate, the *phase*

    phase = age / t_MS,

with t_MS the main-sequence lifetime (age at which the central hydrogen
fraction falls to ``X_end``, 0.01 by default).  phase = 0 is the zero-age
model, phase = 1 the end of the main sequence, and equal fractions of the
main-sequence life line up between tracks (the usual way of matching
"equivalent evolutionary points" of neighbouring tracks, KWW 2012 ch. 30;
Hansen, Kawaler & Trimble 2004, sect. 2.4).

Why age and not the central hydrogen fraction: (1) a sampler asks for a star
at an age, and age -> phase is one division by the lifetime, itself a smooth
function of mass and composition, whereas an X_c-based phase would need the
inverse of each track's age(X_c) at every call; (2) X_c falls at rates that
differ between radiative cores (pp chain, dX/dt ~ X^2, a slow tail) and
convective cores (CNO, mixed, nearly linear), so equal X_c does not mean equal
fractions of the life; (3) the default age prior, uniform up to t_MS, is
uniform in phase.  X_c is stored as a quantity at each phase instead.

Validity: that of :func:`~radwalk.physics.structure.evolution.evolve`
(0.5-20 M_sun, Z 1e-4..0.04, core hydrogen burning only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import PchipInterpolator

from radwalk import constants as const
from radwalk.errors import ConfigError
from radwalk.physics.structure.evolution import X_C_END, Track

__all__ = ["QUANTITIES", "Quantity", "PhaseTrack", "model_scalars", "resample", "phase_nodes"]


@dataclass(frozen=True)
class Quantity:
    """One stored scalar: its name, cgs unit and whether it is stored (and interpolated) as log10."""

    name: str
    unit: str
    log: bool
    description: str


# Names follow the quantity catalogue of `radwalk model` (radwalk.forward.quantities) where it has them.
QUANTITIES = (
    Quantity("radius", "cm", True, "photospheric radius"),
    Quantity("luminosity", "erg/s", True, "surface luminosity"),
    Quantity("teff", "K", True, "effective temperature"),
    Quantity("central_hydrogen", "", False, "central hydrogen mass fraction X_c"),
    Quantity("central_temperature", "K", True, "central temperature"),
    Quantity("central_density", "g/cm^3", True, "central density"),
    Quantity("central_pressure", "dyn/cm^2", True, "central pressure"),
    Quantity("convective_core_mass_fraction", "", False, "mass fraction of the convective core (Schwarzschild)"),
    Quantity("mixed_core_mass_fraction", "", False, "mass fraction of the core mixed by convection and overshoot"),
    Quantity("convective_envelope_base_radius", "", False, "r/R at the base of the outermost convection zone "
             "(1: none)"),
    Quantity("convective_envelope_base_mass_fraction", "", False, "m/M at the base of the outermost convection "
             "zone (1: none)"),
    Quantity("diffusion_time", "s", True, "photon diffusion time, centre to surface, (1/c) int kappa rho r dr"),
    Quantity("diffusion_time_radiative_core", "s", True, "photon diffusion time through radiative layers only"),
    Quantity("energy_transport_time", "s", True, "energy-transport (thermal) time U/L"),
    Quantity("kelvin_helmholtz_time", "s", True, "Kelvin-Helmholtz time |Omega|/L"),
    Quantity("convective_turnover_time", "s", True, "local turnover time half a pressure scale height above "
             "the envelope base (NaN without an envelope)"),
    Quantity("convective_turnover_time_global", "s", True, "integral of dr/v over the convective envelope "
             "(NaN without an envelope)"),
)
NAMES = tuple(q.name for q in QUANTITIES)


def phase_nodes(n: int = 51) -> np.ndarray:
    """Equally spaced phases 0..1, [n] (the spacing of a uniform axis keeps lookups O(1))."""
    if n < 2:
        raise ConfigError(f"a track needs at least 2 phase points, got {n}")
    return np.linspace(0.0, 1.0, int(n))


def model_scalars(star) -> dict:
    """Every stored scalar of one solved model (cgs), keyed as :data:`QUANTITIES`, but the mixed core.

    The mixed core (convective core plus overshoot) depends on the track's
    overshoot parameter and comes from :attr:`Track.q_mixed`.

    Parameters
    ----------
    star : StarStructure

    Returns
    -------
    dict of str -> float
    """
    return {
        "radius": star.R, "luminosity": star.L_surface, "teff": star.T_eff, "central_hydrogen": float(star.X[0]),
        "central_temperature": star.T_c, "central_density": star.rho_c, "central_pressure": star.P_c,
        "convective_core_mass_fraction": star.convective_core_mass_fraction(),
        "convective_envelope_base_radius": star.envelope_base_radius(),
        "convective_envelope_base_mass_fraction": star.envelope_base_mass_fraction(),
        "diffusion_time": star.photon_diffusion_time(),
        "diffusion_time_radiative_core": star.photon_diffusion_time(radiative_only=True),
        "energy_transport_time": star.thermal_time(),
        "kelvin_helmholtz_time": star.kelvin_helmholtz_time(),
        "convective_turnover_time": star.local_turnover_time(),
        "convective_turnover_time_global": star.global_turnover_time(),
    }


@dataclass
class PhaseTrack:
    """A track's scalars at fixed phases.

    Attributes
    ----------
    M : float, g
    X0, Z : float
        Initial hydrogen and metal mass fractions.
    phase : ndarray [n_phase]
        0 (zero age) .. 1 (central hydrogen fraction ``X_end``).
    lifetime : float, s
        Main-sequence lifetime t_MS (age at X_c = X_end); NaN when the track
        stopped before it (then every value is NaN).
    values : ndarray [n_phase, n_quantities]
        In the order of :data:`QUANTITIES`, cgs, *not* logarithmic.
    X_end : float
    n_steps : int
        Evolution steps of the source track.
    stop_reason : str
    cpu_seconds : float
        CPU time of the track and its resampling, s.
    """

    M: float
    X0: float
    Z: float
    phase: np.ndarray
    lifetime: float
    values: np.ndarray
    X_end: float
    n_steps: int
    stop_reason: str = ""
    cpu_seconds: float = field(default=0.0, compare=False)

    @property
    def age(self) -> np.ndarray:
        """Age at each phase, s, [n_phase]."""
        return self.phase * self.lifetime

    def column(self, name: str) -> np.ndarray:
        """One quantity at every phase, [n_phase]."""
        return self.values[:, NAMES.index(name)]


def _along(age_steps, y, ages, log):
    """PCHIP of y(age) over the steps where y is finite; NaN in intervals with a non-finite end."""
    ok = np.isfinite(y) & ((y > 0.0) if log else True)
    out = np.full(ages.shape, np.nan)
    if ok.sum() < 2:
        if ok.sum() == 1:
            out[np.isclose(ages, age_steps[ok][0], rtol=0.0, atol=1e-6 * max(age_steps[-1], 1.0))] = y[ok][0]
        return out
    fy = np.log(y[ok]) if log else y[ok]
    vals = PchipInterpolator(age_steps[ok], fy)(ages)
    if log:
        vals = np.exp(vals)
    # A phase point is kept when both steps around it have a finite value (an envelope that appears
    # between two steps is not invented across the gap).
    j = np.clip(np.searchsorted(age_steps, ages, side="right"), 1, age_steps.size - 1)
    good = ok[j - 1] & ok[j]
    exact = np.isin(ages, age_steps[ok])
    out[good | exact] = vals[good | exact]
    return out


def resample(track: Track, phase=None, X_end: float = X_C_END) -> PhaseTrack:
    """Resample a track on the phase coordinate age / t_MS.

    Parameters
    ----------
    track : Track
        From :func:`~radwalk.physics.structure.evolution.evolve`, run at least
        to X_c <= ``X_end`` (with its models).
    phase : ndarray [n_phase], optional
        Phases in 0..1, increasing (default :func:`phase_nodes`).
    X_end : float
        Central hydrogen fraction that defines the end of the main sequence.

    Returns
    -------
    PhaseTrack
        Each quantity interpolated in age between the track's steps by a
        monotone cubic (PCHIP), of the logarithm where :data:`QUANTITIES` says
        so.  All NaN (lifetime NaN) when the track did not reach ``X_end``.

    Notes
    -----
    The steps are limited by the change of X (0.02 by default), ~40 per
    track, so the resampling error is that of PCHIP between steps at most
    ~3 % of the lifetime apart.
    """
    import time

    t0 = time.process_time()
    phase = phase_nodes() if phase is None else np.asarray(phase, dtype=float)
    if phase.ndim != 1 or phase.size < 2 or np.any(np.diff(phase) <= 0) or phase[0] < 0 or phase[-1] > 1:
        raise ConfigError("phases must increase within 0..1")
    if len(track.models) != track.n_steps:
        raise ConfigError("the track carries no models: resampling needs every step's solved structure")
    lifetime = track.main_sequence_lifetime(X_end)
    values = np.full((phase.size, len(QUANTITIES)), np.nan)
    if math.isfinite(lifetime) and lifetime > 0.0:
        rows = [model_scalars(s) for s in track.models]
        for row, q_mixed in zip(rows, track.q_mixed):  # the overshoot belongs to the track, not the model
            row["mixed_core_mass_fraction"] = float(q_mixed)
        ages = np.minimum(phase * lifetime, track.age[-1])
        for k, q in enumerate(QUANTITIES):
            y = np.array([r[q.name] for r in rows], dtype=float)
            values[:, k] = _along(track.age, y, ages, q.log)
    stop = track.stop_reason
    if not math.isfinite(lifetime):
        stop = f"did not reach X_c = {X_end:g}: {stop}"
    return PhaseTrack(M=track.M, X0=track.X0, Z=track.Z, phase=phase, lifetime=float(lifetime), values=values,
                      X_end=float(X_end), n_steps=track.n_steps, stop_reason=stop,
                      cpu_seconds=track.cpu_seconds + time.process_time() - t0)


def describe(pt: PhaseTrack) -> str:
    """One line about a resampled track (mass, composition, lifetime)."""
    return (f"M = {pt.M / const.M_SUN:.4g} M_sun, X0 = {pt.X0:.4g}, Z = {pt.Z:.4g}: "
            f"t_MS = {pt.lifetime / (1e9 * const.YEAR):.4g} Gyr, {pt.n_steps} steps")
