"""One star's interior for given mass and composition: what `radwalk model` prints."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from astropy.table import Table

from radwalk import constants as k
from radwalk.errors import ConfigError, ModelError, ValidityWarning
from radwalk.forward.quantities import plain_unit, quantity
from radwalk.forward.stages import StageSet
from radwalk.host.stages import DEFAULTS
from radwalk.physics.composition import check_composition, mu

# The quantities of the summary, in order; units and words from the quantity catalogue.
SUMMARY_ROWS = (
    "mass", "radius", "luminosity", "teff", "age", "mu", "central_density", "central_temperature",
    "central_pressure", "central_hydrogen", "mean_free_path_center", "photosphere_radius", "diffusion_time",
    "diffusion_time_radiative_core", "diffusion_time_uniform", "convective_crossing_time", "energy_transport_time",
    "kelvin_helmholtz_time", "dynamical_time", "main_sequence_lifetime", "eddington_luminosity", "eddington_ratio",
    "convective_core_mass_fraction", "convective_envelope_base_radius", "convective_turnover_time",
    "convective_turnover_time_global",
)
# shown indented under the one before
SUB_ROWS = ("diffusion_time_radiative_core", "diffusion_time_uniform", "convective_turnover_time_global")


# The components an age selects when no other profile or relation is named: only a model with a history takes an
# age.  The stage table's default when it is such a model (the track-grid stages, once they are the defaults),
# else the solved star.
AGE_MODELS = {"profile": "solved", "relation": "solved"}
MODELS_WITH_AGE = ("solved", "track-grid")


def with_age(stages: dict, settings: dict, age: float) -> None:
    """Adds an age (Gyr) to stage names and settings, choosing models with an age unless others are named."""
    for stage, name in AGE_MODELS.items():
        stages.setdefault(stage, DEFAULTS[stage] if DEFAULTS[stage] in MODELS_WITH_AGE else name)
    settings["age"] = age


def summary_key(name: str) -> str:
    """The JSON key of a quantity: its name and output unit (``radius_rsun``, ``central_density_g_cm3``)."""
    unit = quantity(name).output_unit
    return f"{name}_{unit.lower().replace(' / ', '_').replace('_sun', 'sun')}" if unit else name


@dataclass
class Interior:
    summary: dict  # JSON-ready
    profile_table: Table
    warnings: list


def model_star(stages: StageSet, mass: float, X: float, Z: float, settings: dict | None = None,
               radius: float | None = None, luminosity: float | None = None) -> Interior:
    """Builds the interior of one star.

    Parameters
    ----------
    mass : float, M_sun
    X, Z : float
    settings : dict
        Component parameter values by name (checked against their ranges).
    radius : float, optional, R_sun
        Replaces the relation's radius.
    luminosity : float, optional, L_sun
        Replaces the relation's luminosity.
    """
    if not np.isfinite(mass) or mass <= 0:
        raise ConfigError(f"mass = {mass} M_sun is not allowed; the mass must be finite and positive")
    check_composition(X, Z)
    for name, v in (("radius", radius), ("luminosity", luminosity)):
        if v is not None and (not np.isfinite(v) or v <= 0):
            raise ConfigError(f"{name} = {v} is not allowed; it must be finite and positive")
    values = stages.defaults()
    for name, v in (settings or {}).items():
        values[name] = stages.param(name).check(v)
    values.update(mass=np.array([mass]), X=np.array([X]), Z=np.array([Z]))
    outside = stages.outside_support(values)
    if outside:  # e.g. an age past the end of this star's main sequence
        raise ModelError("; ".join(outside))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ValidityWarning)
        pred = stages.predict(values, use_grid=False)  # one star: solve exactly, no grid to build
        R = pred["radius"] if radius is None else np.array([radius * k.R_SUN])
        L = pred["luminosity"] if luminosity is None else np.array([luminosity * k.L_SUN])
        if not (np.isfinite(R[0]) and np.isfinite(L[0])):
            raise ModelError(
                f"relation {stages.relation.name!r} finds no main-sequence star of {mass:g} M_sun with "
                f"X = {X:g}, Z = {Z:g}; give --radius and --luminosity to model it anyway"
            )
        prof, tr = stages.structure(values, R, L)
    if getattr(stages.profile, "sets_radius", False):
        # A solved star: its radius and luminosity come out of the solution.
        if radius is not None or luminosity is not None:
            raise ConfigError(f"profile {stages.profile.name!r} solves for the radius and luminosity itself; "
                              "--radius and --luminosity apply to the polytrope profiles")
        R, L = prof.R, tr.fields["luminosity"][:, -1]
    notes = list(dict.fromkeys([str(w.message) for w in caught] + stages.validity_messages(values, prof)))
    X_model = float(prof.X[0])
    if abs(X_model - X) > 1e-6:  # a model with a composition rule of its own (the track grid's Y(Z))
        notes.append(f"profile {stages.profile.name!r} has X = {X_model:.4g} at Z = {Z:.4g} (its own composition "
                     f"rule), not the X = {X:.4g} asked for; the summary gives its X")
        X = X_model
    ratio = float(np.atleast_1d(tr.scalars.get("eddington_ratio", [np.nan]))[0])
    if ratio > 1.0:  # radiation pressure on electrons beats gravity at the surface (Kippenhahn et al., 22.10)
        notes.append(f"L = {L[0] / k.L_SUN:.3g} L_sun is {ratio:.3g} times the Eddington luminosity of a {mass:g} "
                     "M_sun star: radiation would drive its surface away, so no star in hydrostatic equilibrium "
                     "has it; the model is outside its validity")
    r_rel = prof.r[0] / prof.R[0]
    teff = (L[0] / (4 * np.pi * R[0] ** 2 * k.SIGMA_SB)) ** 0.25
    age = float(np.atleast_1d(values["age"])[0]) if "age" in values else np.nan  # NaN: a model without an age
    computed = {"mass": mass, "radius": R[0], "luminosity": L[0], "teff": teff, "mu": mu(X, Z), "age": age,
                **{name: v[0] for name, v in tr.scalars.items()}}
    # A quantity the models do not give (the main-sequence lifetime of a polytrope) is null.
    rows = [(summary_key(n), _json_number(quantity(n).to_output(computed.get(n, np.nan)))) for n in SUMMARY_ROWS]
    summary = {
        **dict(rows[:4]),  # mass, radius, luminosity, teff; then the composition
        "X": float(X),
        "Z": float(Z),
        **dict(rows[4:]),
        "convective_zones": tr.zones(0, r_rel),
        "radius_source": "given" if radius is not None else _source(stages),
        "luminosity_source": "given" if luminosity is not None else _source(stages),
        "stages": {st: c.name for st, c in stages.components().items()},
        "parameters": {p.name: float(np.atleast_1d(values[p.name])[0]) for p in stages.component_params()},
        "warnings": notes,
    }
    return Interior(summary, profile_table(prof, tr, 0), notes)


def _json_number(v) -> float | None:
    """A float for the JSON summary; None (null) where the model has no value."""
    v = float(v)
    return v if np.isfinite(v) else None


def _source(stages: StageSet) -> str:
    """Which component set R and L: the relation, or a profile that solves for them."""
    return stages.profile.name if getattr(stages.profile, "sets_radius", False) else stages.relation.name


def profile_table(prof, tr, i: int) -> Table:
    """The radial profile of sample i as an astropy Table with units."""
    import astropy.units as u

    f = tr.fields
    t = Table()
    t["r_over_R"] = prof.r[i] / prof.R[i]
    t["m_over_M"] = prof.m[i] / prof.M[i]
    t["rho"] = prof.rho[i] * u.g / u.cm**3
    t["T"] = prof.T[i] * u.K
    t["P"] = prof.P[i] * u.dyn / u.cm**2
    t["kappa"] = f["kappa"][i] * u.cm**2 / u.g
    t["mean_free_path"] = f["mean_free_path"][i] * u.cm
    t["tau"] = f["tau"][i]
    t["luminosity"] = f["luminosity"][i] / k.L_SUN * u.Lsun
    t["nabla_rad"] = f["nabla_rad"][i]
    t["nabla_ad"] = f["nabla_ad"][i]
    if "nabla" in f:
        t["nabla"] = f["nabla"][i]
    if "v_conv" in f:
        t["v_conv"] = f["v_conv"][i] * u.cm / u.s
    t["zone"] = np.where(tr.convective[i], "convective", "radiative")
    t["diffusion_time_cumulative"] = f["diffusion_time_cumulative"][i] * u.yr
    t.meta["comments"] = [
        "radwalk radial profile: centre first; tau is the optical depth inward from the outermost point;",
        "diffusion_time_cumulative is the mean photon first-passage time from the centre to r.",
    ]
    return t


def format_summary(summary: dict) -> str:
    """Aligned human table with units."""
    lines = []
    st = summary["stages"]
    lines.append(f"stages: profile={st['profile']}  opacity={st['opacity']}  relation={st['relation']}")
    if summary["parameters"]:
        lines.append("parameters: " + "  ".join(f"{k_}={v:g}" for k_, v in summary["parameters"].items()))
    lines.append(f"composition: X={summary['X']:g}  Z={summary['Z']:g}  Y={1 - summary['X'] - summary['Z']:g}")
    lines.append("")
    labels = {n: ("  " if n in SUB_ROWS else "") + quantity(n).short for n in SUMMARY_ROWS}
    width = max(len(label) for label in labels.values())
    for name in SUMMARY_ROWS:
        key, unit, label = summary_key(name), plain_unit(quantity(name).output_unit), labels[name]
        v = summary[key]
        if v is None:
            txt = "n/a"  # e.g. no convective envelope, or a model without an age
        else:
            txt = f"{v:.4g}" if abs(v) < 1e5 or v == 0 else f"{v:.4e}"
        note = ""
        if key == "radius_rsun" and summary["radius_source"] == "given":
            note = "  (given)"
        if key == "luminosity_lsun" and summary["luminosity_source"] == "given":
            note = "  (given)"
        lines.append(f"  {label:<{width}}  {txt:>12}  {unit}{note}")
    zones = summary["convective_zones"]
    ztxt = ", ".join(f"{a:.3f}-{b:.3f}" for a, b in zones) if zones else "none"
    lines.append(f"  {'convective zones (r/R)':<{width}}  {ztxt}")
    for w in summary["warnings"]:
        lines.append(f"warning: {w}")
    return "\n".join(lines)
