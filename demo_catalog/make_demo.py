"""Writes the invented demo catalog (demo_stars.ecsv) and its truths (truths.ecsv).

The Quillwater field is made up: 24 invented stars with invented names.
Each regular star gets a mass (spread evenly in log M over 0.7-7 M_sun), a metal
fraction Z (log-uniform over 0.004-0.03; X follows from the default composition
rule Y = Y_p + dY/dZ Z) and an age (uniform over 5-90 % of its main-sequence
life, or of 13.8 Gyr for the long-lived); radius, luminosity and T_eff are what
the default stages (the track grid computed with the combined opacity, Gaussian
likelihood) predict for them.  The observed values are those plus Gaussian noise of
the quoted relative errors (2-10 %).  A few rows are awkward on purpose (see
README.md): T_eff withheld, a large uncertainty, a giant-like star that no
main-sequence model reaches, and an id that is unsafe as a file name.

Run from anywhere: ``python demo_catalog/make_demo.py``.  The same seed
gives the same files.
"""

from __future__ import annotations

import sys
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.table import MaskedColumn, Table

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from radwalk import constants as k  # noqa: E402
from radwalk.forward.stages import StageSet  # noqa: E402
from radwalk.host.registry import Registry  # noqa: E402
from radwalk.physics.composition import X_SUN, Z_SUN  # noqa: E402
from radwalk.plugins.track_grid import AGE_OF_UNIVERSE_GYR  # noqa: E402

SEED = 20261201
N_REGULAR = 23
FIELD = "Quillwater"
UNSAFE_INDEX = 17  # "Quillwater 17/B": a space and a slash
TEFF_MISSING_INDEX = 6
LARGE_ERROR_INDEX = 11
FEH_ERROR = 0.08  # dex
# The giant-like star: radius far too large for its luminosity on the main sequence.
GIANT = {"id": f"{FIELD} 24", "radius": 11.0, "luminosity": 55.0, "rel": (0.07, 0.09)}


def _round(x: float, digits: int = 4) -> float:
    return float(f"{x:.{digits}g}")


def forward(stages: StageSet, mass, Z, age):
    """X, R (R_sun), L (L_sun), T_eff (K) and t_MS (Gyr) of the default stages at (M, Z, age)."""
    vals = stages.defaults()
    vals.update(mass=np.atleast_1d(mass), Z=np.atleast_1d(Z), age=np.atleast_1d(age))
    vals["X"] = stages.hydrogen_fraction(vals)
    p = stages.predict(vals)
    q = stages.quick_quantities(vals)
    return vals["X"], p["radius"] / k.R_SUN, p["luminosity"] / k.L_SUN, p["teff"], q["main_sequence_lifetime"]


def lifetimes(stages: StageSet, mass, Z):
    """Main-sequence lifetimes (Gyr) of the default stages, [n]."""
    return forward(stages, mass, Z, np.zeros(np.size(mass)))[4]


def make(seed: int = SEED):
    rng = np.random.default_rng(seed)
    stages = StageSet.build(Registry(entry_points=False), {})
    # Evenly spread in log M with a little jitter, so every part of 0.7-7 M_sun has stars.
    step = (np.log(7.0) - np.log(0.7)) / N_REGULAR
    masses = np.exp(np.log(0.7) + step * (np.arange(N_REGULAR) + rng.uniform(0.1, 0.9, N_REGULAR)))
    Z = np.exp(rng.uniform(np.log(0.004), np.log(0.03), N_REGULAR))
    # Ages over 5-90 % of the life the prior allows (the main sequence, at most the age of the universe).
    life = np.minimum(lifetimes(stages, masses, Z), AGE_OF_UNIVERSE_GYR)
    ages = life * rng.uniform(0.05, 0.90, N_REGULAR)
    X, R, L, T, _ = forward(stages, masses, Z, ages)
    rel_r = rng.uniform(0.03, 0.08, N_REGULAR)
    rel_l = rng.uniform(0.04, 0.10, N_REGULAR)
    rel_t = rng.uniform(0.02, 0.03, N_REGULAR)
    rel_r[LARGE_ERROR_INDEX], rel_l[LARGE_ERROR_INDEX], rel_t[LARGE_ERROR_INDEX] = 0.35, 0.40, 0.08
    has_feh = rng.random(N_REGULAR) < 0.5
    noise = rng.standard_normal((4, N_REGULAR))

    rows, truths = [], []
    for i in range(N_REGULAR):
        name = f"{FIELD} {i + 1}" + ("/B" if i + 1 == UNSAFE_INDEX else "")
        # Noise in proportion to the truth; a measurement cannot be negative.
        r_obs = max(R[i] * (1 + rel_r[i] * noise[0, i]), 0.2 * R[i])
        l_obs = max(L[i] * (1 + rel_l[i] * noise[1, i]), 0.2 * L[i])
        t_obs = T[i] * (1 + rel_t[i] * noise[2, i])
        feh_true = np.log10(Z[i] / X[i]) - np.log10(Z_SUN / X_SUN)
        row = {
            "id": name,
            "radius": _round(r_obs), "radius_err": _round(rel_r[i] * R[i], 2),
            "luminosity": _round(l_obs), "luminosity_err": _round(rel_l[i] * L[i], 2),
            "teff": _round(t_obs), "teff_err": _round(rel_t[i] * T[i], 2),
            "feh": round(feh_true + FEH_ERROR * noise[3, i], 2) if has_feh[i] else None,
            "feh_err": FEH_ERROR if has_feh[i] else None,
        }
        note = ""
        if i == TEFF_MISSING_INDEX:
            row["teff"] = row["teff_err"] = None
            note = "T_eff not measured"
        elif i == LARGE_ERROR_INDEX:
            note = "large uncertainties (35 % in R, 40 % in L, 8 % in T_eff)"
        elif i + 1 == UNSAFE_INDEX:
            note = "id with a space and a slash (unsafe as a file name)"
        rows.append(row)
        truths.append({"id": name, "mass": masses[i], "X": X[i], "Z": Z[i], "age": ages[i], "radius": R[i],
                       "luminosity": L[i],
                       "teff": T[i], "feh": feh_true, "note": note})

    g = GIANT
    t_giant = k.TEFF_SUN * (g["luminosity"] / g["radius"] ** 2) ** 0.25
    rows.append({"id": g["id"], "radius": g["radius"], "radius_err": _round(g["rel"][0] * g["radius"], 2),
                 "luminosity": g["luminosity"], "luminosity_err": _round(g["rel"][1] * g["luminosity"], 2),
                 "teff": _round(t_giant), "teff_err": 120.0, "feh": None, "feh_err": None})
    truths.append({"id": g["id"], "mass": np.nan, "X": np.nan, "Z": np.nan, "age": np.nan, "radius": g["radius"],
                   "luminosity": g["luminosity"], "teff": t_giant, "feh": np.nan,
                   "note": "giant-like: no main-sequence model reaches this radius at this luminosity"})
    return rows, truths


def _masked(rows, key, unit=None):
    values = [np.nan if r[key] is None else r[key] for r in rows]
    return MaskedColumn(values, name=key, mask=[r[key] is None for r in rows], unit=unit)


def write(rows, truths, folder: Path = HERE):
    cat = Table()
    cat["id"] = [r["id"] for r in rows]
    for key, unit in (("radius", u.R_sun), ("luminosity", u.L_sun)):
        cat[key] = [r[key] for r in rows] * unit
        cat[f"{key}_err"] = [r[f"{key}_err"] for r in rows] * unit
    cat["teff"] = _masked(rows, "teff", u.K)
    cat["teff_err"] = _masked(rows, "teff_err", u.K)
    cat["feh"] = _masked(rows, "feh", u.dex)
    cat["feh_err"] = _masked(rows, "feh_err", u.dex)
    cat.meta["description"] = (f"Invented demo catalog: the {FIELD} field, made up for radwalk's demo "
                               f"(demo_catalog/make_demo.py, seed {SEED}); no real stars.")
    cat.write(folder / "demo_stars.ecsv", overwrite=True)

    tru = Table()
    tru["id"] = [t["id"] for t in truths]
    tru["mass"] = [t["mass"] for t in truths] * u.M_sun
    tru["X"] = [t["X"] for t in truths]
    tru["Z"] = [t["Z"] for t in truths]
    tru["age"] = [t["age"] for t in truths] * u.Gyr
    tru["radius"] = [t["radius"] for t in truths] * u.R_sun
    tru["luminosity"] = [t["luminosity"] for t in truths] * u.L_sun
    tru["teff"] = [t["teff"] for t in truths] * u.K
    tru["feh"] = [t["feh"] for t in truths] * u.dex
    tru["note"] = [t["note"] for t in truths]
    tru.meta["description"] = (f"True parameters of the invented {FIELD} demo stars (make_demo.py, seed {SEED}); "
                               "radius, luminosity and T_eff are the noise-free predictions of the default stages.")
    tru.write(folder / "truths.ecsv", overwrite=True)


if __name__ == "__main__":
    write(*make())
    print(f"wrote {HERE / 'demo_stars.ecsv'} and {HERE / 'truths.ecsv'}")
