"""Mean molecular weights of a fully ionised mixture.

1/mu = 2X + 3Y/4 + Z/2 and mu_e = 2/(1 + X), with Y = 1 - X - Z
(Kippenhahn, Weigert & Weiss 2012, ch. 4; Carroll & Ostlie 1996, ch. 10).
"""

import numpy as np

from radwalk.constants import X_SUN, Z_SUN  # noqa: F401  (the reference composition lives with the constants)
from radwalk.errors import ConfigError


def helium(X, Z):
    """Helium mass fraction Y = 1 - X - Z."""
    return 1.0 - np.asarray(X) - np.asarray(Z)


def mu(X, Z):
    """Mean molecular weight per particle of a fully ionised gas."""
    X = np.asarray(X, dtype=float)
    Z = np.asarray(Z, dtype=float)
    return 1.0 / (2.0 * X + 0.75 * (1.0 - X - Z) + 0.5 * Z)


def mu_e(X):
    """Mean molecular weight per free electron, 2 / (1 + X)."""
    return 2.0 / (1.0 + np.asarray(X, dtype=float))


def check_composition(X, Z):
    """Raises ConfigError unless 0 <= X, 0 <= Z and X + Z <= 1 (scalars)."""
    for name, v in (("X", X), ("Z", Z)):
        if not np.isfinite(v) or v < 0 or v > 1:
            raise ConfigError(f"{name} = {v} is not a mass fraction; allowed: 0 <= {name} <= 1")
    if X + Z > 1:
        raise ConfigError(f"X + Z = {X + Z:g} exceeds 1; the helium fraction Y = 1 - X - Z must be >= 0")
