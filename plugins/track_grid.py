"""Built-in track-grid components: a main-sequence star of given mass, metallicity and age read off a grid of tracks.

The relation and the profile named ``track-grid`` interpolate the grid of
main-sequence tracks of :mod:`radwalk.forward.model_grid` (tracks over mass
and Z, resampled on the phase age / t_MS) at each sample's (M, Z, age):
R, L and T_eff, and the scalars of the interior (central conditions, the
convective core and envelope, the photon diffusion, thermal and
Kelvin-Helmholtz times, the turnover times, central X and the main-sequence
lifetime), in microseconds per sample instead of seconds per solved star.

The age (Gyr since the zero-age main sequence) is a sampled parameter.  Its
prior is uniform from 0 to min(t_MS(M, Z), 13.8 Gyr) at every mass and Z: the
declared prior is uniform on 0..13.8 Gyr, the age of the universe
(13.787 +- 0.020 Gyr, Planck Collaboration 2020, A&A 641, A6; from memory);
both components declare the support age <= t_MS(M, Z) through the host's
support check (:meth:`radwalk.forward.stages.StageSet.support`), so the
posterior is zero past the end of the main sequence and prior draws stay
before it; and the relation adds the joint prior term -log min(t_MS, 13.8 Gyr)
(:meth:`TrackGridRelation.log_prior_density`), so that a short-lived mass is
not down-weighted against a long-lived one: the mass prior stays the one declared.

Composition: a grid holds one initial X for each Z (its composition rule,
Y = Y_p + dY/dZ Z by default).  Both components declare it
(``hydrogen_fraction``), so a fit computes X from Z instead of sampling it, and
the [Fe/H] prior, the mean molecular weight and the reported X are the grid
star's.

The grid comes from :func:`radwalk.forward.model_grid.cached_grid` for the
bound opacity law and the default :class:`~radwalk.forward.model_grid.GridSpec`
(so another opacity law, or other values of its parameters, get their own
grid).  A grid that is not there yet is built on first use, after its
estimated CPU cost is printed; the options ``grid_mass`` and ``grid_z``
(``LO..HI``) build only the tracks that cover a mass and metallicity range,
and ``grid`` names a grid file to use instead (``radwalk grid build``).

The profile solves the radial structure (the aged star of
:func:`radwalk.physics.structure.models.solved_stars`, one track from the
zero-age model to the sample's age, 1-6 s of CPU) only for the samples the
profile bands need (:attr:`TrackGridProfile.band_samples`); every scalar a
fit reports comes from the grid (:meth:`TrackGridProfile.quantities`).

Validity: that of the grid (its masses and metallicities, core hydrogen
burning only); outside it, or past the end of the main sequence, the relation
gives NaN (no star) and the support check is False.
"""

from __future__ import annotations

import math
import os
import sys
from pathlib import Path

import numpy as np

from radwalk import constants as k
from radwalk.errors import ConfigError, ModelError
from radwalk.forward.model_grid import (
    GridSpec,
    TrackGrid,
    cached_grid,
    estimate_cpu_seconds,
    opacity_identity,
    track_opacity,
)
from radwalk.host.components import Profile
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Option, Param, Prior, Validity
from radwalk.physics.composition import mu
from radwalk.physics.structure.models import opacity_key, solved_stars

AGE_OF_UNIVERSE_GYR = 13.8
"""Upper end of the age prior, Gyr: the age of the universe, 13.787 +- 0.020 Gyr (Planck Collaboration 2020,
A&A 641, A6; from memory), rounded up."""

GYR = 1e9 * k.YEAR

BAND_SAMPLES = 20
"""Samples whose radial structure is solved for the profile bands of a fit: 20 evenly spaced posterior
samples put the 16th-84th percentile band on about 6 stars either side (common practice, no source); each
costs one evolved star (see :data:`BAND_DXC`)."""

BAND_DXC = 0.05
"""Evolution step control (largest change of X per step) of the band stars: 0.05 instead of the tracks' 0.02
takes 2-3 times fewer steps, and halving it changes L at 4.57 Gyr by only 1e-5 (measured, notes of
:func:`radwalk.physics.structure.evolution.evolve`)."""

_GRIDS: dict = {}  # (opacity identity, options) -> TrackGrid, shared by the profile and the relation


def _params():
    return (
        Param(name="age", unit="Gyr", lower=0.0, upper=AGE_OF_UNIVERSE_GYR, default=0.0,
              description="age since the zero-age main sequence (at most the main-sequence lifetime)",
              prior=Prior("uniform", 0.0, AGE_OF_UNIVERSE_GYR), sampled=True, latex=r"$t\,[\mathrm{Gyr}]$"),
    )


_OPTIONS = (
    Option("grid", "path of a track-grid file (radwalk grid build) to use instead of the cache's grid"),
    Option("grid_mass", "build only the tracks covering this mass range, 'LO..HI' in M_sun"),
    Option("grid_z", "build only the tracks covering this metallicity range, 'LO..HI'"),
    Option("band_stars", f"posterior samples whose radial structure is solved for the profile bands when the "
                         f"grid stores no profiles (a grid file of version 1) or a plugin adds derived quantities "
                         f"(default {BAND_SAMPLES}; each costs ~2 s of CPU)"),
)


def _count(text, name: str) -> int:
    try:
        value = int(str(text).strip())
    except ValueError:
        value = 0
    if value < 1:
        raise ConfigError(f"option {name} = {text!r}: give a whole number of at least 1")
    return value


def _range(text, name: str) -> tuple[float, float] | None:
    if text is None or str(text).strip() == "":
        return None
    parts = str(text).replace(",", "..").split("..")
    try:
        lo, hi = (float(v) for v in parts)
    except ValueError:
        raise ConfigError(f"option {name} = {text!r}: give a range as LO..HI, e.g. 0.8..2") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
        raise ConfigError(f"option {name} = {text!r}: the range must be positive and increasing")
    return lo, hi


def _flat(a, n):
    a = np.asarray(a, dtype=float)
    return np.broadcast_to(a.reshape(-1) if a.ndim else a, (n,))


def hydrogen_of(grid: TrackGrid, Z):
    """Initial X of the grid's stars at metallicity Z, by the composition rule in its header, [n]."""
    rule = grid.header.get("composition_rule", {})
    Z = np.asarray(Z, dtype=float)
    if rule.get("rule") == "fixed X":
        return np.full_like(Z, float(rule["X"]))
    return 1.0 - (float(rule["Y_p"]) + float(rule["dY_dZ"]) * Z) - Z


FIXED_OPACITY = ("it reads every star off a grid of evolved tracks computed with the law at fixed parameter "
                 "values, one grid per value (about half an hour of CPU each for the default grid's 273 tracks), "
                 "so a parameter that changes from walker to walker and step to step has no grid")
"""Why the track-grid stages cannot sample an opacity parameter (the host refuses it before a fit starts:
:func:`radwalk.host.config.refuse_sampled_opacity`)."""


class _GridSource:
    """Finds the track grid of a bound opacity law: the named file, the cache's, or one built now."""

    options = _OPTIONS
    fixed_opacity_params = FIXED_OPACITY

    def __init__(self, grid=None, grid_mass=None, grid_z=None, band_stars=None):
        self.grid_file = str(Path(grid).expanduser().resolve()) if grid else None
        self.mass_range = _range(grid_mass, "grid_mass")
        self.z_range = _range(grid_z, "grid_z")
        self.band_samples = BAND_SAMPLES if band_stars is None else _count(band_stars, "band_stars")
        self.options_key = (self.grid_file, self.mass_range, self.z_range)
        self.validity = self._validity()

    def configure(self, **options):
        known = [o.name for o in _OPTIONS]
        for key in options:
            if key not in known:
                raise ConfigError(f"{self.name} has no option {key!r}; options: {', '.join(known)}")
        merged = {"grid": self.grid_file, "grid_mass": _text(self.mass_range), "grid_z": _text(self.z_range),
                  "band_stars": self.band_samples}
        merged.update({key: v for key, v in options.items() if v is not None})
        return type(self)(**merged)

    def spec(self) -> GridSpec:
        """The grid these options ask for: the default one, restricted to the mass and Z ranges if given."""
        spec = GridSpec()
        if self.mass_range or self.z_range:
            spec = spec.restricted(self.mass_range, self.z_range)
        return spec

    def _validity(self) -> Validity:
        # No X range: these stages take X from the grid's composition rule, so the sampled X is never outside.
        if self.grid_file:
            with np.load(self.grid_file, allow_pickle=False) as f:
                masses, metals = 10.0 ** f["log_mass"], 10.0 ** f["log_z"]
        else:
            spec = self.spec()
            masses, metals = spec.masses(), spec.metallicities()
        return Validity(mass=(float(masses[0]), float(masses[-1])), Z=(float(metals[0]), float(metals[-1])),
                        note="main-sequence stars (core hydrogen burning) interpolated in a grid of solved tracks; "
                             "X follows the grid's composition rule (Y = Y_p + dY/dZ Z), not the sampled X")

    def grid(self, opacity) -> TrackGrid:
        """The grid for the bound opacity law (loaded or built once per process)."""
        okey = opacity_key(opacity)
        if okey[0] == "callable":
            raise ConfigError(f"the {self.name} stages cannot take an opacity law whose parameters vary from "
                              f"sample to sample: {FIXED_OPACITY}; hold the opacity parameters fixed, or use the "
                              "'solved' profile and relation")
        key = (okey, self.options_key)
        if key not in _GRIDS:
            kappa = track_opacity(opacity)  # the grid's key is the bound law's; the builder calls it per star
            _GRIDS[key] = self._file_grid(kappa) if self.grid_file else self._cached_grid(kappa)
        return _GRIDS[key]

    def grid_available(self, opacity) -> bool:
        """Whether the grid for the bound law is at hand (a grid file, shipped or cached) without building it."""
        if self.grid_file:
            return True
        okey = opacity_key(opacity)
        if okey[0] == "callable":
            return False
        key = (okey, self.options_key)
        if key not in _GRIDS:
            grid = cached_grid(track_opacity(opacity), self.spec(), build=False)
            if grid is None:
                return False
            _GRIDS[key] = grid
        return True

    def _file_grid(self, opacity) -> TrackGrid:
        try:
            grid = TrackGrid.load(self.grid_file)
        except (OSError, ValueError, KeyError) as exc:
            raise ConfigError(f"track grid {self.grid_file}: cannot be read ({exc})") from None
        built, wanted = grid.header.get("opacity", {}), opacity_identity(opacity)
        # What both identities record must agree (a grid file written before the identity recorded more, such
        # as the hashes of the modules the law imports, is judged on what it has).
        differ = sorted(key for key in set(built) & set(wanted) if built[key] != wanted[key])
        if differ or "law" not in built:
            what = {"source_sha256": "the law's source", "imports_sha256": "the physics modules the law uses",
                    "params": "the law's parameters", "law": "the law", "name": "the law's class",
                    "module": "the law's module", "options": "the law's options"}
            changed = ", ".join(what.get(key, key) for key in differ) or "the law (not recorded)"
            raise ConfigError(
                f"track grid {self.grid_file} was built with opacity {built.get('law') or built.get('name')!r} "
                f"{built.get('params', {})}; this run's {wanted.get('law') or wanted.get('name')!r} "
                f"{wanted.get('params', {})} differs in {changed}: build a grid for it (radwalk grid build)")
        return grid

    def _cached_grid(self, opacity) -> TrackGrid:
        spec = self.spec()
        grid = cached_grid(opacity, spec, build=False)
        if grid is not None:
            return grid
        cpu = estimate_cpu_seconds(spec)
        cores = os.cpu_count() or 1
        law = getattr(getattr(opacity, "law", None), "name", "the opacity law")
        print(f"radwalk: no track grid yet for opacity {law!r}: building {spec.n_mass} masses "
              f"({spec.mass_range[0]:g}-{spec.mass_range[1]:g} M_sun) x {spec.n_z} metallicities "
              f"({spec.z_range[0]:g}-{spec.z_range[1]:g}), about {cpu:.0f} s of CPU "
              f"({cpu / cores / 60:.1f} min on {cores} cores); it is kept for later runs.  "
              f"--set grid_mass=LO..HI --set grid_z=LO..HI builds only the tracks covering a range.",
              file=sys.stderr)
        return cached_grid(opacity, spec, progress=sys.stderr.isatty())

    def _at(self, M, Z, age, opacity):
        """Grid values at the samples and where they are inside: (dict of [n], bool [n])."""
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        n = M.size
        grid = self.grid(opacity)
        values, inside = grid(M, _flat(Z, n), _flat(age, n) * GYR)
        return grid, values, inside

    def support(self, M, X, Z, opacity=None, age=0.0):
        """Where a star exists on the grid's main sequence: 0 <= age <= min(t_MS(M, Z), 13.8 Gyr), bool [n].

        Parameters
        ----------
        M : array_like [n], g
        X : array_like [n]
            Not used: the grid's composition rule sets X.
        Z : array_like [n]
        opacity : callable
            The bound opacity stage (it selects the grid).
        age : array_like [n] or float, Gyr
        """
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        n = M.size
        age = _flat(age, n)
        life = self.grid(opacity).lifetime_at(M, _flat(Z, n)) / GYR  # NaN outside the grid
        with np.errstate(invalid="ignore"):
            return np.isfinite(life) & (age >= 0.0) & (age <= np.minimum(life, AGE_OF_UNIVERSE_GYR))

    def hydrogen_fraction(self, Z, opacity=None, age=0.0):
        """Initial X of the grid's star at metallicity Z (its composition rule), [n]."""
        return hydrogen_of(self.grid(opacity), Z)

    def support_note(self, M, X, Z, opacity=None, age=0.0) -> str:
        """Why the first sample lies outside the support, in words."""
        m, z, a = float(np.ravel(M)[0]), float(np.ravel(_flat(Z, 1))[0]), float(np.ravel(_flat(age, 1))[0])
        grid = self.grid(opacity)
        life = float(grid.lifetime_at(np.array([m]), np.array([z]))[0]) / GYR
        star = f"a {m / k.M_SUN:.4g} M_sun star with Z = {z:.4g}"
        if not math.isfinite(life):
            lo, hi = 10.0 ** grid.log_mass[[0, -1]], 10.0 ** grid.log_z[[0, -1]]
            return (f"{star} is outside the track grid ({lo[0]:.3g}-{lo[1]:.3g} M_sun, Z {hi[0]:.3g}-{hi[1]:.3g}, "
                    "or a track there failed)")
        if a > life:
            return (f"age {a:g} Gyr is beyond the end of the main sequence of {star}: its main-sequence lifetime "
                    f"is {life:.4g} Gyr")
        return f"age {a:g} Gyr is outside 0..{min(life, AGE_OF_UNIVERSE_GYR):.4g} Gyr for {star}"


def _text(rng) -> str | None:
    return None if rng is None else f"{rng[0]!r}..{rng[1]!r}"


class TrackGridRelation(_GridSource):
    """R and L of the main-sequence star of mass M, metallicity Z and age, interpolated in the track grid."""

    name = "track-grid"
    # its predict, support, log_prior_density and hydrogen_fraction are what radwalk.inference.fused compiles
    # (tests/inference/test_fused.py holds the two equal); age_cap is the support's upper age, Gyr
    fused_model = "track-grid"
    age_cap = AGE_OF_UNIVERSE_GYR
    description = ("R and L of the main-sequence star at its age, interpolated in a grid of solved tracks "
                   "(mass x Z x age / t_MS) computed with the chosen opacity law")
    params = _params()

    def predict(self, M, X, Z, opacity, age=0.0):
        """Photospheric radius (cm) and luminosity (erg/s), [n]; NaN outside the grid or past the main sequence.

        Parameters
        ----------
        M : array_like [n], g
        X : array_like [n]
            Not used: the grid's composition rule sets X.
        Z : array_like [n]
        opacity : callable
            The bound opacity stage, ``kappa(rho, T, X, Z)`` in cm^2/g (it selects the grid).
        age : array_like [n] or float, Gyr
        """
        _, values, _ = self._at(M, Z, age, opacity)
        return values["radius"], values["luminosity"]

    def log_prior_density(self, M, X, Z, opacity=None, age=0.0):
        """-log min(t_MS(M, Z), 13.8 Gyr), [n]: with the support, the age prior is uniform up to that limit.

        Declared by the relation only (the profile shares the age), so that the term counts once.  Without
        it the declared density 1/13.8 Gyr at every mass would weight each mass by the length of its
        allowed ages and pull the mass posterior toward long-lived, low masses.
        """
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        life = self.grid(opacity).lifetime_at(M, _flat(Z, M.size)) / GYR
        with np.errstate(invalid="ignore", divide="ignore"):
            return -np.log(np.minimum(life, AGE_OF_UNIVERSE_GYR) / AGE_OF_UNIVERSE_GYR)

    def unreachable_note(self, observed, opacity=None, Z=(0.0, 1.0)) -> str | None:
        """Whether the observed star lies off the main sequence for every allowed metallicity, in words.

        The observed radius and luminosity (from any two of R, L and T_eff)
        are set against the zero-age and end-of-main-sequence radii at the
        same luminosity, along the grid's masses, at metallicities across the
        allowed range ``Z`` (lo, hi) within the grid.

        Returns
        -------
        str or None
            "beyond the end of the main sequence for every allowed composition: ..."
            when the star is larger than the end-of-main-sequence star of its
            luminosity at every allowed Z; "below the zero-age main sequence
            ..." when it is smaller than the zero-age star at every allowed Z;
            None otherwise (or when fewer than two observables are measured,
            or the luminosity lies beyond the grid's masses).
        """
        R, L = _observed_radius_luminosity(observed)
        if R is None:
            return None
        grid = self.grid(opacity)
        zlo, zhi = max(Z[0], 10.0 ** grid.log_z[0]), min(Z[1], 10.0 ** grid.log_z[-1])
        if not zlo <= zhi:
            return None
        metals = np.geomspace(zlo, zhi, 5) if zhi > zlo else np.array([zlo])
        masses = np.geomspace(10.0 ** grid.log_mass[0], 10.0 ** grid.log_mass[-1], 200) * k.M_SUN
        verdicts, limits = [], []
        for z in metals:
            zams, _ = grid(masses, z, 0.0)
            life = grid.lifetime_at(masses, np.full(masses.size, z))
            tams, _ = grid(masses, z, life * (1.0 - 1e-9))
            r0, r1 = _radius_at(L, zams), _radius_at(L, tams)
            if r0 is None or r1 is None:
                return None  # the luminosity lies beyond the grid's masses at this Z: nothing to say
            verdicts.append("beyond" if R > r1 else "below" if R < r0 else "on")
            limits.append((z, r0, r1))
        star = f"R = {R / k.R_SUN:.4g} R_sun at L = {L / k.L_SUN:.4g} L_sun"
        zr = f"Z {metals[0]:.3g}-{metals[-1]:.3g}"
        if all(v == "beyond" for v in verdicts):
            largest = max(r1 for _, _, r1 in limits)
            return (f"beyond the end of the main sequence for every allowed composition: {star} is larger than "
                    f"the star at central hydrogen exhaustion of that luminosity, at most {largest / k.R_SUN:.4g} "
                    f"R_sun ({zr}); an evolved star is outside these main-sequence models")
        if all(v == "below" for v in verdicts):
            smallest = min(r0 for _, r0, _ in limits)
            return (f"below the zero-age main sequence for every allowed composition: {star} is smaller than "
                    f"the zero-age star of that luminosity, at least {smallest / k.R_SUN:.4g} R_sun ({zr})")
        return None


def _observed_radius_luminosity(observed):
    """(R cm, L erg/s) from any two measured observables, or (None, None)."""
    v = observed.values
    have = set(observed.present())
    R, L, T = v.get("radius"), v.get("luminosity"), v.get("teff")
    if {"radius", "luminosity"} <= have:
        return float(R), float(L)
    if {"luminosity", "teff"} <= have:
        return float(math.sqrt(L / (4.0 * math.pi * k.SIGMA_SB * T**4))), float(L)
    if {"radius", "teff"} <= have:
        return float(R), float(4.0 * math.pi * R**2 * k.SIGMA_SB * T**4)
    return None, None


def _radius_at(L, values):
    """Radius at luminosity L along a sequence of masses (L rises with mass), by interpolation in log; None
    when L lies outside the sequence."""
    lr, ll = np.log10(values["radius"]), np.log10(values["luminosity"])
    good = np.isfinite(lr) & np.isfinite(ll)
    lr, ll = lr[good], ll[good]
    if ll.size < 2 or not ll[0] <= math.log10(L) <= ll[-1] or np.any(np.diff(ll) <= 0):
        return None
    return float(10.0 ** np.interp(math.log10(L), ll, lr))


class TrackGridProfile(_GridSource):
    """Interior quantities and radial profiles interpolated in the track grid; structures solved only on request
    (a plugin's derived quantities, or a grid file without profiles)."""

    name = "track-grid"
    fused_model = "track-grid"  # its support and hydrogen_fraction are the relation's (radwalk.inference.fused)
    description = ("interior of the main-sequence star at its age: scalars interpolated in a grid of solved "
                   "tracks, radial structure solved (evolved from zero age) for the samples the bands need")
    params = _params()
    sets_radius = True  # the solved structure's own R and L go with its profile

    def quantities(self, M, X, Z, opacity=None, age=0.0) -> dict:
        """The interior's scalars at (M, Z, age) from the grid, in the quantity catalogue's computed units.

        Parameters
        ----------
        M : array_like [n], g
        X : array_like [n]
            Not used: the grid's composition rule sets X.
        Z : array_like [n]
        opacity : callable
            The bound opacity stage (it selects the grid, and gives the central mean free path).
        age : array_like [n] or float, Gyr

        Returns
        -------
        dict of str -> ndarray [n]
            Central density (g/cm^3), temperature (K), pressure (dyn/cm^2) and
            hydrogen; the convective core's mass fraction and the envelope
            base's r/R and m/M; the photon diffusion times, the energy-transport
            and Kelvin-Helmholtz times (yr), the turnover times (d), the
            main-sequence lifetime (Gyr), the central mean free path (cm), the
            dynamical time (s), the Eddington luminosity (erg/s) and ratio, and
            the mean molecular weight of the grid's composition.
            NaN outside the grid or past the end of the main sequence.
        """
        grid, v, _ = self._at(M, Z, age, opacity)
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        Zs = _flat(Z, M.size)
        X0 = hydrogen_of(grid, Zs)
        rho_c, T_c, X_c = v["central_density"], v["central_temperature"], v["central_hydrogen"]
        with np.errstate(invalid="ignore", divide="ignore"):
            ok = np.isfinite(rho_c) & np.isfinite(T_c)
            kappa_c = np.full(M.size, np.nan)
            if ok.any():
                kappa_c[ok] = opacity(rho_c[ok], T_c[ok], X_c[ok], Zs[ok])
            kappa_es = k.SIGMA_T * (1.0 + X0) / (2.0 * k.M_U)  # Thomson, as the transport stage's
            L_edd = 4.0 * np.pi * k.G * M * k.C / kappa_es
            return {
                "central_density": rho_c, "central_temperature": T_c, "central_pressure": v["central_pressure"],
                "central_hydrogen": X_c,
                "mean_free_path_center": 1.0 / (kappa_c * rho_c),
                "convective_core_mass_fraction": v["convective_core_mass_fraction"],
                "convective_envelope_base_radius": v["convective_envelope_base_radius"],
                "convective_envelope_base_mass_fraction": v["convective_envelope_base_mass_fraction"],
                "diffusion_time": v["diffusion_time"] / k.YEAR,
                "diffusion_time_radiative_core": v["diffusion_time_radiative_core"] / k.YEAR,
                "energy_transport_time": v["energy_transport_time"] / k.YEAR,
                # The tracks store |Omega| / L; the catalogue's Kelvin-Helmholtz time is |Omega| / (2 L).
                "kelvin_helmholtz_time": v["kelvin_helmholtz_time"] / 2.0 / k.YEAR,
                "dynamical_time": np.sqrt(v["radius"] ** 3 / (k.G * M)),
                "eddington_luminosity": L_edd + 0.0 * v["luminosity"],
                "eddington_ratio": v["luminosity"] / L_edd,
                "convective_turnover_time": v["convective_turnover_time"] / 86400.0,
                "convective_turnover_time_global": v["convective_turnover_time_global"] / 86400.0,
                "main_sequence_lifetime": v["main_sequence_lifetime"] / GYR,
                "mu": mu(X0, Zs) + 0.0 * v["radius"],  # the grid's composition, not the sampled X
            }

    def band_profiles(self, M, X, Z, opacity=None, age=0.0):
        """Radial profiles of the stars at their ages, interpolated in the grid's stored profiles, for the bands.

        Parameters
        ----------
        M : array_like [n], g
        X : array_like [n]
            Not used: the grid's composition rule sets X.
        Z : array_like [n]
        opacity : callable
            The bound opacity stage (it selects the grid).
        age : array_like [n] or float, Gyr

        Returns
        -------
        (r_rel, fields) or None
            r_rel [g] and fields name -> [n, g]: rho (g/cm^3), T (K), kappa (cm^2/g), mean_free_path (cm),
            diffusion_time_cumulative (yr), mass (m/M), convective (0/1); NaN outside the grid.  None for a
            grid file without profiles (version 1): the bands are then solved (:meth:`profile`).

        Notes
        -----
        Linear in log M, log Z and phase between the grid's tracks
        (:mod:`radwalk.forward.grid_profiles`): microseconds per star, against seconds for a solved one.
        """
        grid = self.grid(opacity)
        if not grid.has_profiles:
            return None
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        n = M.size
        r_rel, fields = grid.profiles_at(M, _flat(Z, n), _flat(age, n) * GYR)
        fields["diffusion_time_cumulative"] = fields["diffusion_time_cumulative"] / k.YEAR
        return r_rel, fields

    def profile(self, M, R, X, Z, opacity=None, age=0.0) -> Profile:
        """Solved structures of ``n`` stars at their ages, with the grid's composition and mixing length.

        Parameters
        ----------
        M : array_like [n], g
        R : array_like [n], cm
            Ignored: the solution sets the radius.
        X : array_like [n]
            Not used: the grid's composition rule sets X.
        Z : array_like [n]
        opacity : callable
            The bound opacity stage ``kappa(rho, T, X, Z)``, cm^2/g.
        age : float or array_like [n], Gyr

        Returns
        -------
        Profile
            Arrays [n, nmesh], centre to photosphere, as the solved profile's;
            the grid's scalars (:meth:`quantities`) ride along in ``scalars``.

        Notes
        -----
        Each star is evolved from its zero-age model to its age (one track,
        1-6 s of CPU).  Its track may end slightly before the grid's
        interpolated lifetime (the grid's interpolation error); an age in
        that gap gets the track's last model, at central hydrogen exhaustion.
        An age past the grid's lifetime, or a star outside the grid, is
        refused (ModelError, saying which).
        """
        if opacity is None:
            raise TypeError("the track-grid profile needs the opacity stage (opacity=...)")
        M = np.atleast_1d(np.asarray(M, dtype=float)).reshape(-1)
        n = M.size
        Zs, ages = _flat(Z, n), _flat(age, n)
        grid = self.grid(opacity)
        X0 = hydrogen_of(grid, Zs)
        alpha = float(grid.header["spec"]["alpha_mlt"])
        inside = self.support(M, X0, Zs, opacity=opacity, age=ages)
        if not inside.all():
            i = int(np.argmin(inside))
            raise ModelError(self.support_note(M[i:i + 1], X0[i:i + 1], Zs[i:i + 1], opacity=opacity,
                                               age=ages[i:i + 1]))
        stars = solved_stars(M, X0, Zs, opacity, alpha_mlt=alpha, age=ages, past_end="last", dXc=BAND_DXC)

        def stack(attr):
            return np.stack([getattr(s, attr) for s in stars])

        P, T = stack("P"), stack("T")
        beta = 1.0 - k.A_RAD * T**4 / (3.0 * P)
        scalars = {
            "convective_turnover_time": np.array([s.local_turnover_time() for s in stars]) / 86400.0,
            "convective_turnover_time_global": np.array([s.global_turnover_time() for s in stars]) / 86400.0,
            "convective_crossing_time": np.array([s.convective_crossing_time("all") for s in stars]) / k.YEAR,
            "convective_core_mass_fraction": np.array([s.convective_core_mass_fraction() for s in stars]),
            "convective_envelope_base_radius": np.array([s.envelope_base_radius() for s in stars]),
            "convective_envelope_base_mass_fraction": np.array([s.envelope_base_mass_fraction() for s in stars]),
            "main_sequence_lifetime": grid.lifetime_at(M, Zs) / GYR,
        }
        return Profile(
            r=stack("r"), m=stack("m"), rho=stack("rho"), P=P, T=T, beta=beta,
            M=M.copy(), R=np.array([s.R for s in stars]), X=np.array(X0, dtype=float), Z=np.array(Zs, dtype=float),
            L=stack("L"), nabla=stack("nabla"), convective=stack("convective"), v_conv=stack("v_conv"),
            u=stack("u"), X_profile=stack("X"), scalars=scalars,
        )


@hookimpl
def radwalk_profiles():
    return [TrackGridProfile()]


@hookimpl
def radwalk_relations():
    return [TrackGridRelation()]
