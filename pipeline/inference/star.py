"""Star records: one star's measured observables, validated, in cgs."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np

from radwalk.errors import CatalogError
from radwalk.forward.quantities import quantity
from radwalk.host.components import OBSERVABLES, Observations


@dataclass(frozen=True)
class Star:
    """One star: id, observables in cgs (NaN: not measured) and an optional [Fe/H].

    User units are the quantity catalogue's output units (R_sun, L_sun, K).

    ``luminosity_derived`` says that the catalog computed L from its own R and
    T_eff (L = 4 pi R^2 sigma T_eff^4).  L then holds no information beyond
    theirs, and its error is not independent of theirs: counting it as a third
    measurement would count R and T_eff twice.  When R and T_eff are both
    measured, :meth:`observations` leaves L out of the likelihood (it stays in
    the star's record and reports); when one of them is missing, L carries its
    information and is kept.
    """

    id: str
    values: tuple  # (radius cm, luminosity erg/s, teff K)
    errors: tuple
    feh: tuple | None = None  # ([Fe/H], error) in dex
    luminosity_derived: bool = False

    @classmethod
    def from_user_units(cls, id, radius=None, radius_err=None, luminosity=None, luminosity_err=None,
                        teff=None, teff_err=None, feh=None, feh_err=None, luminosity_derived=False) -> Star:
        """From R_sun, L_sun, K (None or NaN: not measured); raises CatalogError for bad values.

        ``luminosity_derived``: the luminosity was computed from this radius and T_eff (see the class).
        """
        given = {"radius": (radius, radius_err), "luminosity": (luminosity, luminosity_err), "teff": (teff, teff_err)}
        vals, errs = [], []
        for key in OBSERVABLES:
            v, e = given[key]
            v = np.nan if v is None else float(v)
            e = np.nan if e is None else float(e)
            q = quantity(key)
            factor, unit, label = q.scale, q.output_unit, q.plain
            if np.isnan(v) and np.isnan(e):
                vals.append(np.nan)
                errs.append(np.nan)
                continue
            if not np.isfinite(v) or v <= 0:
                raise CatalogError(f"{label} = {v:g} {unit} is not allowed: it must be finite and positive")
            if not np.isfinite(e) or e <= 0:
                raise CatalogError(
                    f"uncertainty of {label} = {e:g} {unit} is not allowed: it must be finite and positive"
                )
            vals.append(v * factor)
            errs.append(e * factor)
        if all(np.isnan(vals)):
            raise CatalogError("no observable given: need at least one of radius, luminosity, teff")
        fe = None
        feh_nan = feh is not None and isinstance(feh, (float, np.floating)) and np.isnan(feh)
        if feh_nan and feh_err is not None and not np.isnan(feh_err):
            # an error without a value is a mistake, not "not measured" (the catalog reader says the same)
            raise CatalogError(f"[Fe/H] = {feh} with an error of {feh_err} dex: give a finite [Fe/H], or neither "
                               "(not measured)")
        if feh is not None and not feh_nan:
            if feh_err is None or not np.isfinite(feh_err) or feh_err <= 0 or not np.isfinite(feh):
                raise CatalogError(f"[Fe/H] = {feh} needs a finite value and a finite positive error")
            if not -5 < feh < 1.5:
                raise CatalogError(f"[Fe/H] = {feh:g} dex is outside -5 to 1.5, not a stellar metallicity")
            fe = (float(feh), float(feh_err))
        return cls(str(id), tuple(vals), tuple(errs), fe, bool(luminosity_derived))

    @property
    def luminosity_used(self) -> bool:
        """Whether the measured L enters the likelihood (False when it repeats R and T_eff, or is missing)."""
        values = dict(zip(OBSERVABLES, self.values))
        if not np.isfinite(values["luminosity"]):
            return False
        if self.luminosity_derived:
            return not (np.isfinite(values["radius"]) and np.isfinite(values["teff"]))
        return True

    def luminosity_note(self) -> str:
        """One line on how a luminosity marked as derived is used ("" for a measured one)."""
        if not self.luminosity_derived or not np.isfinite(self.values[OBSERVABLES.index("luminosity")]):
            return ""
        if self.luminosity_used:
            return ("luminosity marked as derived from R and T_eff, but one of them is not measured: L is kept "
                    "in the likelihood in its place")
        return "luminosity derived from R and T_eff in the catalog: left out of the likelihood (R and T_eff fit)"

    def observations(self) -> Observations:
        """The observables the likelihood compares, in cgs (NaN: not measured or not used)."""
        values, errors = dict(zip(OBSERVABLES, self.values)), dict(zip(OBSERVABLES, self.errors))
        if self.luminosity_derived and not self.luminosity_used:
            values["luminosity"] = errors["luminosity"] = np.nan
        return Observations(values, errors)

    def user_values(self) -> dict:
        """Observables in R_sun, L_sun, K as name -> (value, error)."""
        return {key: (quantity(key).to_output(v), quantity(key).to_output(e))
                for key, v, e in zip(OBSERVABLES, self.values, self.errors)}


def seed_for(global_seed: int, star_id: str) -> np.random.SeedSequence:
    """Per-star seed spawned from the global seed by the star's id (order- and worker-independent)."""
    digest = hashlib.sha256(star_id.encode("utf-8")).digest()
    key = tuple(int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4))
    return np.random.SeedSequence(global_seed, spawn_key=key)
