"""Build cost and leave-one-out interpolation error of a moderate track grid (radwalk.forward.model_grid).

Builds (or reuses from the cache folder) a grid of 8 masses 0.8-5 M_sun x 3 Z 0.003-0.04 with the default
opacity, prints the CPU time per track and of the whole build, the interpolator's time per call of 32
samples, and the leave-one-out errors along mass and metallicity.  About 2.5 CPU minutes on 2 cores.

    .venv/bin/python benchmarks/track_grid.py [--workers 2] [--masses 8] [--metallicities 3]
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

from radwalk import constants as const
from radwalk.forward.model_grid import GridSpec, cached_grid, grid_key, grid_path, leave_one_out
from radwalk.physics.opacity import default_kappa

# The issue's accuracy targets on the main sequence (common practice, no source).
TARGETS = {"luminosity": 0.01, "teff": 0.005, "radius": 0.01, "main_sequence_lifetime": 0.02}


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--workers", type=int, default=2)
    p.add_argument("--masses", type=int, default=8)
    p.add_argument("--metallicities", type=int, default=3)
    p.add_argument("--json", metavar="FILE", help="also write the numbers as JSON")
    a = p.parse_args()
    spec = GridSpec(mass_range=(0.8, 5.0), n_mass=a.masses, z_range=(0.003, 0.04), n_z=a.metallicities)
    t0 = time.perf_counter()
    grid = cached_grid(default_kappa, spec, workers=a.workers)
    wall = time.perf_counter() - t0
    b = grid.header["build"]
    cpu = grid.track_cpu_seconds
    print(f"grid {grid_path(grid_key(default_kappa, spec))}")
    print(f"build: {b['tracks']} tracks, {b['cpu_seconds']:.0f} s CPU, {b['wall_seconds']:.0f} s wall on "
          f"{b['workers']} workers (this call {wall:.1f} s); failed {len(b['failed'])}")
    print(f"CPU per track: min {cpu.min():.2f} s, median {np.median(cpu):.2f} s, max {cpu.max():.2f} s")
    for i, m in enumerate(10.0 ** grid.log_mass):
        print(f"  {m:5.2f} M_sun: " + "  ".join(f"{c:5.2f} s" for c in cpu[i]) + "   t_MS/Gyr: "
              + "  ".join(f"{t / (1e9 * const.YEAR):7.3f}" for t in grid.lifetime[i]))

    rng = np.random.default_rng(0)
    M = 10.0 ** rng.uniform(grid.log_mass[0], grid.log_mass[-1], 32) * const.M_SUN
    Z = 10.0 ** rng.uniform(grid.log_z[0], grid.log_z[-1], 32)
    age = rng.uniform(0.0, 0.9, 32) * grid.lifetime_at(M, Z)
    grid(M, Z, age)
    n = 2000
    t0 = time.perf_counter()
    for _ in range(n):
        grid(M, Z, age)
    per_call = (time.perf_counter() - t0) / n
    print(f"interpolation: {per_call * 1e6:.0f} us per call of 32 samples")

    out = {"build": b, "cpu_per_track": cpu.tolist(), "us_per_call_32": per_call * 1e6}
    for axis in ("mass", "z"):
        if grid.shape[0 if axis == "mass" else 1] < 3:
            continue
        loo = leave_one_out(grid, axis)
        out[f"loo_{axis}"] = loo["summary"]
        print(f"\nleave one {axis} node out ({loo['outside']} points fell outside):")
        print(f"  {'quantity':40s} {'max':>10s} {'rms':>10s}  target")
        for name, s in loo["summary"].items():
            t = TARGETS.get(name)
            print(f"  {name:40s} {s['max']:10.4g} {s['rms']:10.4g}  {t if t else ''}")
        if axis == "mass":
            e = loo["errors"]
            print("  per left-out mass (max over Z and phase): L dex, Teff dex, R rel, t_MS rel")
            for k in range(e["luminosity"].shape[0]):
                m = 10.0 ** grid.log_mass[k + 1]
                print(f"    {m:5.2f} M_sun: {np.nanmax(np.abs(e['luminosity'][k])):.4f} "
                      f"{np.nanmax(np.abs(e['teff'][k])):.4f} {np.nanmax(np.abs(e['radius'][k])):.4f} "
                      f"{np.nanmax(np.abs(e['main_sequence_lifetime'][k])):.4f}")
    if a.json:
        with open(a.json, "w") as fh:
            json.dump(out, fh, indent=1, default=float)


if __name__ == "__main__":
    main()
