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
    """

    id: str
    values: tuple  # (radius cm, luminosity erg/s, teff K)
    errors: tuple
    feh: tuple | None = None  # ([Fe/H], error) in dex

    @classmethod
    def from_user_units(cls, id, radius=None, radius_err=None, luminosity=None, luminosity_err=None,
                        teff=None, teff_err=None, feh=None, feh_err=None) -> Star:
        """From R_sun, L_sun, K (None or NaN: not measured); raises CatalogError for bad values."""
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
        if feh is not None and not (isinstance(feh, float) and np.isnan(feh)):
            if feh_err is None or not np.isfinite(feh_err) or feh_err <= 0 or not np.isfinite(feh):
                raise CatalogError(f"[Fe/H] = {feh} needs a finite value and a finite positive error")
            if not -5 < feh < 1.5:
                raise CatalogError(f"[Fe/H] = {feh:g} dex is outside -5 to 1.5, not a stellar metallicity")
            fe = (float(feh), float(feh_err))
        return cls(str(id), tuple(vals), tuple(errs), fe)

    def observations(self) -> Observations:
        return Observations(dict(zip(OBSERVABLES, self.values)), dict(zip(OBSERVABLES, self.errors)))

    def user_values(self) -> dict:
        """Observables in R_sun, L_sun, K as name -> (value, error)."""
        return {key: (quantity(key).to_output(v), quantity(key).to_output(e))
                for key, v, e in zip(OBSERVABLES, self.values, self.errors)}


def seed_for(global_seed: int, star_id: str) -> np.random.SeedSequence:
    """Per-star seed spawned from the global seed by the star's id (order- and worker-independent)."""
    digest = hashlib.sha256(star_id.encode("utf-8")).digest()
    key = tuple(int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4))
    return np.random.SeedSequence(global_seed, spawn_key=key)
