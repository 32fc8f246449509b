"""Parameter declarations and priors.

Every component declares the parameters it takes as :class:`Param` records;
the host assembles the sampler's parameter vector from them.  Priors are small
vectorised objects with ``logpdf(x[n]) -> [n]`` that return ``-inf`` outside
their support and never NaN.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from radwalk.errors import ConfigError

# Least fraction of a normal's mass a truncated normal prior must hold between its bounds (a bound 4.75 sigma
# beyond the mean): less is almost surely a mistaken mean or unit, and leaves the prior a sliver.
_MIN_NORMAL_MASS = 1e-6
# Narrowest prior (width over the bounds' size) a sampler can move in: a few ulp leave the walkers no room
# and the optimizer and the stretch moves nothing to work with.
_MIN_RELATIVE_WIDTH = 1e-9


@dataclass(frozen=True)
class Prior:
    """A one-dimensional prior on the declared bounds of a parameter.

    Parameters
    ----------
    kind : str
        ``uniform``, ``log-uniform``, ``normal``, ``truncated-normal``,
        ``salpeter`` or ``kroupa`` (initial-mass-function priors, for a mass in
        M_sun).
    lower, upper : float
        Support (the truncated-normal and IMF priors are cut here too).
    mean, sigma : float, optional
        For the normal kinds.
    """

    kind: str
    lower: float
    upper: float
    mean: float | None = None
    sigma: float | None = None

    KINDS = ("uniform", "log-uniform", "normal", "truncated-normal", "salpeter", "kroupa")

    def __post_init__(self):
        if self.kind not in self.KINDS:
            raise ConfigError(
                f"unknown prior kind {self.kind!r}; allowed: {', '.join(self.KINDS)}"
            )
        for key in ("lower", "upper", "mean", "sigma"):
            v = getattr(self, key)
            if v is None and key in ("mean", "sigma"):
                continue
            if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
                raise ConfigError(f"{self.kind} prior: {key} must be a number, got {v!r}")
            if math.isnan(v):
                raise ConfigError(f"{self.kind} prior: {key} is NaN")
        if not (np.isfinite(self.lower) and np.isfinite(self.upper)):
            if self.kind != "normal":
                raise ConfigError(f"{self.kind} prior needs finite bounds")
        if not self.lower < self.upper:
            raise ConfigError(
                f"impossible prior: lower bound {self.lower:g} is not below upper bound {self.upper:g}"
            )
        if math.isfinite(self.lower) and math.isfinite(self.upper):
            scale = max(abs(self.lower), abs(self.upper), np.finfo(float).tiny)
            if self.upper - self.lower <= _MIN_RELATIVE_WIDTH * scale:
                raise ConfigError(
                    f"{self.kind} prior on [{self.lower!r}, {self.upper!r}] is too narrow to sample (width "
                    f"{self.upper - self.lower:.3g}); hold the parameter fixed under [settings] instead"
                )
        if self.kind in ("log-uniform", "salpeter", "kroupa") and self.lower <= 0:
            raise ConfigError(f"{self.kind} prior needs a positive lower bound, got {self.lower:g}")
        if self.kind in ("normal", "truncated-normal"):
            if self.mean is None or self.sigma is None:
                raise ConfigError(f"{self.kind} prior needs a mean and a positive sigma")
            if not (math.isfinite(self.mean) and math.isfinite(self.sigma) and self.sigma > 0):
                raise ConfigError(f"{self.kind} prior needs a finite mean and a finite positive sigma, "
                                  f"got mean {self.mean:g}, sigma {self.sigma:g}")
            mass = self._normal_mass()
            if not mass >= _MIN_NORMAL_MASS:
                raise ConfigError(
                    f"{self.kind} prior({self.mean:g}, {self.sigma:g}) holds {mass:.2g} of its mass inside its "
                    f"bounds [{self.lower:g}, {self.upper:g}] (at least {_MIN_NORMAL_MASS:g} needed): is the mean "
                    "or sigma in the wrong unit?"
                )

    def _standard_bounds(self):
        """Bounds in sigma from the mean, mirrored into the lower tail (where ndtr keeps its precision)."""
        a = (self.lower - self.mean) / self.sigma
        b = (self.upper - self.mean) / self.sigma
        return (-b, -a, -1.0) if a > 0 else (a, b, 1.0)

    def _normal_mass(self) -> float:
        """Fraction of the untruncated normal's mass inside the bounds."""
        a, b, _ = self._standard_bounds()
        return float(special.ndtr(b) - special.ndtr(a))

    def logpdf(self, x):
        """Log prior density (unnormalised for the IMF kinds), ``-inf`` outside."""
        x = np.asarray(x, dtype=float)
        inside = (x >= self.lower) & (x <= self.upper)
        if self.kind == "uniform":  # the common cases first: they run in the sampler's inner loop
            return np.where(inside, -math.log(self.upper - self.lower), -np.inf)
        xi = np.where(inside, x, 0.5 * (self.lower + self.upper))
        if self.kind == "log-uniform":
            val = -np.log(xi) - math.log(math.log(self.upper / self.lower))
        elif self.kind in ("normal", "truncated-normal"):
            val = -0.5 * ((xi - self.mean) / self.sigma) ** 2
        elif self.kind == "salpeter":
            # Salpeter (1955): dN/dM ~ M^-2.35
            val = -2.35 * np.log(xi)
        else:
            # Kroupa (2001): dN/dM ~ M^-0.3 (<0.08), M^-1.3 (0.08-0.5), M^-2.3 (>0.5),
            # continuous at the breaks.
            val = np.where(
                xi < 0.08,
                -0.3 * np.log(xi / 0.08) - 1.3 * math.log(0.08 / 0.5),
                np.where(xi < 0.5, -1.3 * np.log(xi / 0.5), -2.3 * np.log(xi / 0.5)),
            )
        return np.where(inside, val, -np.inf)

    def sample(self, rng: np.random.Generator, size: int):
        """Draws from the prior by inverting its distribution function (no rejection loop).

        The normal kinds invert the standard normal's distribution function
        between the bounds, mirrored into the lower tail so a bound several
        sigma out keeps its precision; the IMF kinds are piecewise power laws
        whose distribution function inverts in closed form.
        """
        if self.kind == "uniform":
            return rng.uniform(self.lower, self.upper, size)
        if self.kind == "log-uniform":
            return np.exp(rng.uniform(math.log(self.lower), math.log(self.upper), size))
        if self.kind == "normal" and not np.isfinite(self.lower) and not np.isfinite(self.upper):
            return rng.normal(self.mean, self.sigma, size)
        if self.kind in ("normal", "truncated-normal"):
            a, b, sign = self._standard_bounds()
            pa, pb = special.ndtr(a), special.ndtr(b)
            z = special.ndtri(pa + rng.uniform(size=size) * (pb - pa))
            return np.clip(self.mean + sign * self.sigma * z, self.lower, self.upper)
        return self._sample_power_laws(rng, size)

    def _sample_power_laws(self, rng, size):
        """Inverse-CDF draws from a piecewise power law dN/dM ~ M^-alpha (the IMF kinds)."""
        if self.kind == "salpeter":
            pieces = [(self.lower, self.upper, 2.35)]
        else:
            edges = [self.lower] + [e for e in (0.08, 0.5) if self.lower < e < self.upper] + [self.upper]
            pieces = [(lo, hi, 0.3 if hi <= 0.08 else 1.3 if hi <= 0.5 else 2.3)
                      for lo, hi in zip(edges[:-1], edges[1:])]
        # weight of each piece: the integral of exp(logpdf) over it, from the density at its lower end
        weights = []
        for lo, hi, alpha in pieces:
            k = 1.0 - alpha
            c = math.exp(float(self.logpdf(lo))) * lo**alpha
            weights.append(c * (math.log(hi / lo) if abs(k) < 1e-12 else (hi**k - lo**k) / k))
        which = rng.choice(len(pieces), size=size, p=np.asarray(weights) / sum(weights))
        u = rng.uniform(size=size)
        out = np.empty(size)
        for i, (lo, hi, alpha) in enumerate(pieces):
            sel = which == i
            k = 1.0 - alpha
            if abs(k) < 1e-12:
                out[sel] = lo * (hi / lo) ** u[sel]
            else:
                out[sel] = (lo**k + u[sel] * (hi**k - lo**k)) ** (1.0 / k)
        return np.clip(out, self.lower, self.upper)

    def describe(self) -> str:
        """Short human description, e.g. ``uniform[0.5, 2]``."""
        if self.kind in ("normal", "truncated-normal"):
            return f"{self.kind}({self.mean:g}, {self.sigma:g}) on [{self.lower:g}, {self.upper:g}]"
        return f"{self.kind}[{self.lower:g}, {self.upper:g}]"

    def to_dict(self) -> dict:
        d = {"kind": self.kind, "lower": self.lower, "upper": self.upper}
        if self.mean is not None:
            d["mean"] = self.mean
            d["sigma"] = self.sigma
        return d


@dataclass(frozen=True)
class Param:
    """A parameter a component takes.

    Parameters
    ----------
    name : str
        Name used on the command line (``--set name=value``) and in tables.
    unit : str
        Unit of the value as the component receives it ("" for dimensionless).
    lower, upper : float
        Allowed range; values outside are rejected.
    default : float
        Value used when the parameter is held fixed.
    prior : Prior, optional
        Default prior when the parameter is sampled; uniform on the bounds if
        not given.
    description : str
        One line saying what it is.
    sampled : bool
        Whether a fit samples it by default (False: held at ``default``).
    latex : str
        Axis label for plots.
    """

    name: str
    unit: str
    lower: float
    upper: float
    default: float
    description: str
    prior: Prior | None = None
    sampled: bool = False
    latex: str = ""
    owner: str = field(default="", compare=False)

    def default_prior(self) -> Prior:
        return self.prior or Prior("uniform", self.lower, self.upper)

    def check(self, value: float) -> float:
        """Returns ``value`` as float, or raises ConfigError naming the range."""
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise ConfigError(f"parameter {self.name!r} needs a number, got {value!r}") from None
        if not np.isfinite(v) or not (self.lower <= v <= self.upper):
            who = f" of {self.owner}" if self.owner else ""
            raise ConfigError(
                f"parameter {self.name!r}{who} = {value} is outside its allowed range "
                f"[{self.lower:g}, {self.upper:g}] {self.unit}".rstrip()
            )
        return v

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "unit": self.unit,
            "lower": self.lower,
            "upper": self.upper,
            "default": self.default,
            "prior": self.default_prior().to_dict(),
            "sampled": self.sampled,
            "description": self.description,
        }


@dataclass(frozen=True)
class Validity:
    """Where a law or relation may be trusted (None: no limit on that axis).

    Ranges are closed intervals: temperature in K, density in g/cm^3, mass in
    M_sun, and mass fractions X and Z.
    """

    T: tuple[float, float] | None = None
    rho: tuple[float, float] | None = None
    mass: tuple[float, float] | None = None
    X: tuple[float, float] | None = None
    Z: tuple[float, float] | None = None
    note: str = ""

    def describe(self) -> str:
        parts = []
        for key, unit in (("T", "K"), ("rho", "g/cm^3"), ("mass", "M_sun"), ("X", ""), ("Z", "")):
            rng = getattr(self, key)
            if rng is not None:
                parts.append(f"{rng[0]:g} <= {key} <= {rng[1]:g} {unit}".rstrip())
        text = "; ".join(parts) if parts else "no stated limits"
        return f"{text} ({self.note})" if self.note else text

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("T", "rho", "mass", "X", "Z", "note")}


@dataclass(frozen=True)
class Option:
    """A text setting of a component (a file path, a mode), fixed for a run.

    Components that declare options also provide ``configure(**options)``
    returning a configured copy; the host calls it once before a run, with
    the values from ``--set name=value`` or the run config.
    """

    name: str
    description: str
    default: str | None = None
    choices: tuple[str, ...] | None = None

    def to_dict(self) -> dict:
        return {"name": self.name, "description": self.description, "default": self.default,
                "choices": list(self.choices) if self.choices else None}
