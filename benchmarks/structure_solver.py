"""Cost of the stellar-structure solver: CPU time per zero-age model and mesh convergence.

Prints, asserts nothing.  Run from the project root:

    PYTHONPATH=. python benchmarks/structure_solver.py

For each mass: CPU time (time.process_time) and wall time (time.perf_counter)
for a model started from a polytrope and for one started from a solved
neighbour 5 % lighter (homology scaling), with Newton iterations; then the
relative change of L, R and T_c from 400 to 800 mesh points.
"""

from __future__ import annotations

import time

from radwalk import constants as const
from radwalk.physics.structure.solver import solve_star
from radwalk.plugins.opacity import Combined

MASSES = (0.5, 0.8, 1.0, 1.5, 2.0, 3.0, 5.0, 10.0, 20.0)
X, Z = 0.70, 0.02


def _timed(fn):
    c0, w0 = time.process_time(), time.perf_counter()
    out = fn()
    return out, time.process_time() - c0, time.perf_counter() - w0


def main() -> None:
    law = Combined()

    def kappa(rho, T, X, Z):
        return law.kappa(rho, T, X, Z)

    solve_star(1.0 * const.M_SUN, X, Z, kappa)  # imports and caches (Lane-Emden) out of the timing
    print("M/M_sun | polytrope start: cpu s  wall s  iter | neighbour start: cpu s  wall s  iter | "
          "400 vs 800 points: dL/L  dR/R  dTc/Tc")
    for m in MASSES:
        M = m * const.M_SUN
        a, cpu_a, wall_a = _timed(lambda M=M: solve_star(M, X, Z, kappa))
        near = solve_star((0.95 if m > 0.5 else 1.05) * M, X, Z, kappa, guess=a)
        b, cpu_b, wall_b = _timed(lambda M=M, near=near: solve_star(M, X, Z, kappa, guess=near))
        fine = solve_star(M, X, Z, kappa, n_mesh=800, guess=a)
        print(f"{m:7.2f} | {cpu_a:21.3f} {wall_a:7.3f} {a.iterations:5d} | "
              f"{cpu_b:21.3f} {wall_b:7.3f} {b.iterations:5d} | "
              f"{a.L_surface / fine.L_surface - 1:+.1e} {a.R / fine.R - 1:+.1e} {a.T_c / fine.T_c - 1:+.1e}")


if __name__ == "__main__":
    main()
