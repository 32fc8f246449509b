"""The chosen stages of a run and the forward model they make together.

:class:`StageSet` holds one component per stage, the text options they were
configured with and the values of their parameters.  It answers the two
questions everything else asks: what R, L and T_eff a set of (M, X, Z,
parameters) predicts, and what the interior and its transport quantities look
like.  The base parameters (mass, X, Z) belong to the host, not to a stage.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from radwalk import constants as k
from radwalk.constants import X_SUN, Z_SUN
from radwalk.errors import ConfigError, ModelError
from radwalk.host.components import BoundOpacity, Profile, call_component
from radwalk.host.params import Param, Prior
from radwalk.host.registry import Registry, suggest
from radwalk.host.stages import DEFAULTS, STAGES
from radwalk.physics import transport

BASE_PARAMS = (
    Param("mass", "M_sun", 0.05, 150.0, 1.0, "stellar mass",
          prior=Prior("log-uniform", 0.1, 60.0), sampled=True, latex=r"$M\,[M_\odot]$", owner="the star"),
    Param("X", "", 0.0, 1.0, X_SUN, "hydrogen mass fraction",
          prior=Prior("uniform", 0.60, 0.78), sampled=True, latex=r"$X$", owner="the star"),
    Param("Z", "", 0.0, 0.2, Z_SUN, "metal mass fraction",
          prior=Prior("log-uniform", 0.001, 0.05), sampled=True, latex=r"$Z$", owner="the star"),
)


def teff_from(R, L):
    """Effective temperature (K) from radius (cm) and luminosity (erg/s)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return (L / (4.0 * np.pi * R**2 * k.SIGMA_SB)) ** 0.25


@dataclass
class StageSet:
    """One component per stage, configured, with the parameter declarations they bring."""

    registry: Registry
    profile: object
    opacity: object
    relation: object
    likelihood: object
    options: dict = field(default_factory=dict)  # component name -> {option: value}
    # True when a fit samples an opacity parameter: each value would get a relation grid of its own (10-20 s to
    # build, never reused), so the relation is solved directly even for one sample (the optimiser's calls).
    solve_directly: bool = False

    @classmethod
    def build(cls, registry: Registry, names: dict | None = None, options: dict | None = None) -> StageSet:
        """Picks components by name (defaults for stages not named) and configures their options."""
        names = {**DEFAULTS, **(names or {})}
        unknown = set(names) - set(STAGES)
        if unknown:
            raise ConfigError(f"unknown stage {sorted(unknown)[0]!r}; stages: {', '.join(STAGES)}")
        chosen = {s: registry.get(s, names[s]) for s in STAGES}
        options = {name: dict(v) for name, v in (options or {}).items()}
        for stage, comp in chosen.items():
            opts = options.get(comp.name)
            if opts:
                declared = {o.name for o in getattr(comp, "options", ())}
                for key in opts:
                    if key not in declared:
                        raise ConfigError(f"{stage} {comp.name!r} has no option {key!r}{suggest(key, declared)}")
                chosen[stage] = comp.configure(**opts)
        self = cls(registry, **chosen, options=options)
        self._check_name_clashes()
        return self

    def components(self):
        return {s: getattr(self, s) for s in STAGES}

    def component_params(self) -> list[Param]:
        # A parameter declared identically by two stages (the solved profile and the solved relation share
        # the mixing length and the age) is one parameter, passed to both; differing declarations clash.
        out: list[Param] = []
        for s in STAGES:
            for p in getattr(self, s).params:
                if not any(q == p for q in out):
                    out.append(p)
        return out

    def all_params(self) -> list[Param]:
        return list(BASE_PARAMS) + self.component_params()

    def _check_name_clashes(self):
        seen = {}
        for p in self.all_params():
            if p.name in seen:
                raise ConfigError(
                    f"parameter name {p.name!r} is declared by both {seen[p.name]} and {p.owner}; "
                    "rename one of them"
                )
            seen[p.name] = p.owner

    def option_names(self) -> dict:
        return {o.name: comp for comp in self.components().values() for o in getattr(comp, "options", ())}

    def param(self, name: str) -> Param:
        for p in self.all_params():
            if p.name == name:
                return p
        names = [p.name for p in self.all_params()]
        raise ConfigError(
            f"unknown parameter {name!r}{suggest(name, names)}; parameters of these stages: {', '.join(names)}"
        )

    def defaults(self) -> dict:
        return {p.name: p.default for p in self.all_params()}

    def stage_kwargs(self, stage: str, values: dict) -> dict:
        return {p.name: values[p.name] for p in getattr(self, stage).params}

    @property
    def profile_takes_opacity(self) -> bool:
        """Whether the profile model asks for the opacity stage (solved models do; polytropes do not)."""
        import inspect

        return "opacity" in inspect.signature(self.profile.profile).parameters

    def bound_opacity(self, values: dict) -> BoundOpacity:
        return BoundOpacity(self.opacity, self.stage_kwargs("opacity", values))

    # -- forward model ---------------------------------------------------
    def predict(self, values: dict, use_grid: bool = True):
        """Predicted radius (cm), luminosity (erg/s) and T_eff (K) for per-sample values.

        Relations that declare ``gridded = True`` are interpolated on a
        precomputed grid (see :mod:`radwalk.forward.grid`) when their and
        the opacity law's parameters are the same for every sample.
        """
        m_sun = np.atleast_1d(np.asarray(values["mass"], dtype=float))
        n = m_sun.size
        X = np.broadcast_to(np.asarray(values["X"], dtype=float), (n,))
        Z = np.broadcast_to(np.asarray(values["Z"], dtype=float), (n,))
        rel_kw = self.stage_kwargs("relation", values)
        grid = self._grid(values) if use_grid else None
        if grid is None:
            R, L = call_component(f"relation {self.relation.name!r}", self.relation.predict, m_sun * k.M_SUN, X, Z,
                                  self.bound_opacity(values), **rel_kw)
        else:
            R, L, inside = grid(m_sun, X, Z)
            if not inside.all():
                out = ~inside
                sub = {name: (v[out] if np.ndim(v) and np.size(v) == n else v) for name, v in values.items()}
                R[out], L[out] = call_component(
                    f"relation {self.relation.name!r}", self.relation.predict, m_sun[out] * k.M_SUN, X[out], Z[out],
                    self.bound_opacity(sub), **self.stage_kwargs("relation", sub))
        return {"radius": R, "luminosity": L, "teff": teff_from(R, L)}

    def _grid(self, values: dict):
        if self.solve_directly or not getattr(self.relation, "gridded", False):
            return None
        fixed = {}
        for stage in ("opacity", "relation"):
            for name, v in self.stage_kwargs(stage, values).items():
                v = np.asarray(v, dtype=float)
                if v.size > 1 and np.ptp(v) > 0:
                    return None  # a sampled parameter: solve directly
                fixed[name] = float(v.ravel()[0])
        key = tuple(sorted(fixed.items()))
        cache = self.__dict__.setdefault("_grids", {})
        if key not in cache:
            from radwalk.forward.grid import grid_for

            okw = {p.name: fixed[p.name] for p in self.opacity.params}
            rkw = {p.name: fixed[p.name] for p in self.relation.params}
            cache[key] = grid_for(self.relation, self.opacity, okw, rkw, BoundOpacity(self.opacity, okw),
                                  self.options.get(self.opacity.name, {}))
        return cache[key]

    # -- support of the prior and quantities without a profile -----------
    def _component_call(self, stage: str, method, values: dict):
        """``method(M, X, Z, **params)`` of a stage's component, with ``opacity=`` when it takes it."""
        import inspect

        M = np.atleast_1d(np.asarray(values["mass"], dtype=float)) * k.M_SUN
        n = M.size
        X = np.broadcast_to(np.asarray(values["X"], dtype=float), (n,))
        Z = np.broadcast_to(np.asarray(values["Z"], dtype=float), (n,))
        kwargs = self.stage_kwargs(stage, values)
        try:
            takes_opacity = "opacity" in inspect.signature(method).parameters
        except (TypeError, ValueError):
            takes_opacity = False
        if takes_opacity:
            kwargs["opacity"] = self.bound_opacity(values)
        return call_component(f"{stage} {getattr(self, stage).name!r}", method, M, X, Z, **kwargs)

    def hydrogen_stage(self) -> str | None:
        """The stage whose component sets X from Z (an optional ``hydrogen_fraction`` method), or None.

        A component whose stars follow one composition rule (a track grid: one initial X per Z) declares
        ``hydrogen_fraction(Z, **params) -> X [n]`` (``opacity=`` if it takes it); the posterior then does not
        sample X but computes it from Z, so the [Fe/H] prior, the mean molecular weight and the reported X are
        those of the star the model computed.
        """
        for s in STAGES:
            if callable(getattr(getattr(self, s), "hydrogen_fraction", None)):
                return s
        return None

    def hydrogen_fraction(self, values: dict) -> np.ndarray:
        """X of the samples from their Z by the rule of :meth:`hydrogen_stage`, [n]."""
        stage = self.hydrogen_stage()
        comp = getattr(self, stage)
        Z = np.atleast_1d(np.asarray(values["Z"], dtype=float))
        kwargs = self.stage_kwargs(stage, values)
        try:
            import inspect

            if "opacity" in inspect.signature(comp.hydrogen_fraction).parameters:
                kwargs["opacity"] = self.bound_opacity(values)
        except (TypeError, ValueError):
            pass
        return np.asarray(call_component(f"{stage} {comp.name!r}", comp.hydrogen_fraction, Z, **kwargs), dtype=float)

    def prior_density_stages(self) -> list[str]:
        """The stages whose component adds a joint prior density (an optional ``log_prior_density`` method)."""
        return [s for s in STAGES if callable(getattr(getattr(self, s), "log_prior_density", None))]

    def log_prior_density(self, values: dict) -> np.ndarray:
        """Sum of the components' joint prior terms, [n] (0 when none declares one).

        A component may declare ``log_prior_density(M, X, Z, **params) -> [n]`` (same arguments as
        ``support``): a log density its parameters have given the star's, added to the declared priors.  A
        prior uniform in age up to a mass-dependent lifetime is the declared uniform prior, the support
        age <= lifetime, and the term -log(lifetime), which keeps every mass's ages summing to one.
        """
        n = np.atleast_1d(np.asarray(values["mass"], dtype=float)).size
        total = np.zeros(n)
        for stage in self.prior_density_stages():
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                term = self._component_call(stage, getattr(self, stage).log_prior_density, values)
            total = total + np.broadcast_to(np.asarray(term, dtype=float), (n,))
        return total

    def support_stages(self) -> list[str]:
        """The stages whose component declares a support (an optional ``support`` method)."""
        return [s for s in STAGES if callable(getattr(getattr(self, s), "support", None))]

    def support(self, values: dict) -> np.ndarray:
        """Where every component's declared support holds, bool [n] (everywhere when none declares one).

        A component may declare ``support(M, X, Z, **params) -> bool [n]`` (M in g, its own parameters by
        name, and ``opacity=`` the bound opacity stage if the method takes that keyword): the joint region of
        the star's and its parameters' values where its model exists and its prior is non-zero, such as an
        age no greater than the main-sequence lifetime of the mass.  The posterior is -inf outside it and
        prior draws are kept inside it (:mod:`radwalk.inference.posterior`).
        """
        n = np.atleast_1d(np.asarray(values["mass"], dtype=float)).size
        ok = np.ones(n, dtype=bool)
        for stage in self.support_stages():
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                inside = self._component_call(stage, getattr(self, stage).support, values)
            ok &= np.broadcast_to(np.asarray(inside, dtype=bool), (n,))
        return ok

    def outside_support(self, values: dict) -> list[str]:
        """Plain-language reasons why the first sample lies outside a component's support (empty: inside).

        A component explains itself with an optional ``support_note(M, X, Z, **params) -> str`` (same
        arguments as ``support``); otherwise the message names the component and the parameter values.
        Two components that give the same reason (a profile and a relation on one grid) give it once.
        """
        first = {name: (np.atleast_1d(v)[:1] if np.ndim(v) else v) for name, v in values.items()}
        out = []
        for stage in self.support_stages():
            comp = getattr(self, stage)
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                inside = np.asarray(self._component_call(stage, comp.support, first), dtype=bool).reshape(-1)
            if inside[0]:
                continue
            note = getattr(comp, "support_note", None)
            if callable(note):
                out.append(str(self._component_call(stage, note, first)))
            else:
                given = ", ".join(f"{p.name} = {float(np.atleast_1d(first[p.name])[0]):g} {p.unit}".rstrip()
                                  for p in comp.params)
                out.append(f"{stage} {comp.name!r} has no model for mass = "
                           f"{float(np.atleast_1d(first['mass'])[0]):g} M_sun, X = "
                           f"{float(np.atleast_1d(first['X'])[0]):g}, Z = {float(np.atleast_1d(first['Z'])[0]):g}"
                           + (f", {given}" if given else ""))
        return list(dict.fromkeys(out))

    def quick_quantities(self, values: dict) -> dict | None:
        """The profile model's quantities without a radial structure, name -> [n], or None if it has none.

        A profile model may provide ``quantities(M, X, Z, **params) -> dict`` (M in g; ``opacity=`` if it
        takes it): scalar quantities of the catalogue (:mod:`radwalk.forward.quantities`), in their computed
        units, for every sample at little cost (read off a precomputed grid, say).  It then also states
        ``band_samples``, how many samples' radial structures it needs solved for the profile bands.
        """
        fn = getattr(self.profile, "quantities", None)
        if not callable(fn):
            return None
        out = self._component_call("profile", fn, values)
        n = np.atleast_1d(np.asarray(values["mass"], dtype=float)).size
        return {name: np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy() for name, v in out.items()}

    def quick_bands(self, values: dict):
        """The profile model's radial profiles for the bands without solving a structure, or None.

        A profile model with quantities of its own may also provide ``band_profiles(M, X, Z, **params)``
        (``opacity=`` if it takes it) returning ``(r_rel [g], fields)`` with ``fields`` name -> [n, g] for
        every field of :data:`radwalk.results.products.BAND_FIELDS` in the transport stage's units (kappa
        cm^2/g, mean free path cm, cumulative diffusion time yr, convective 0/1) plus ``mass`` (m/M), NaN for
        samples it cannot place; or None when it has none at hand (then the bands are solved).
        """
        fn = getattr(self.profile, "band_profiles", None)
        if not callable(fn):
            return None
        return self._component_call("profile", fn, values)

    def structure(self, values: dict, R, L) -> tuple[Profile, transport.Transport]:
        """Interior profile and transport quantities of stars with the given R (cm) and L (erg/s)."""
        M = np.atleast_1d(np.asarray(values["mass"], dtype=float)) * k.M_SUN
        n = M.size
        X = np.broadcast_to(np.asarray(values["X"], dtype=float), (n,)).copy()
        Z = np.broadcast_to(np.asarray(values["Z"], dtype=float), (n,)).copy()
        R = np.broadcast_to(np.asarray(R, dtype=float), (n,)).copy()
        L = np.broadcast_to(np.asarray(L, dtype=float), (n,)).copy()
        opacity = self.bound_opacity(values)
        kwargs = self.stage_kwargs("profile", values)
        if self.profile_takes_opacity:
            kwargs["opacity"] = opacity
        prof = call_component(f"profile {self.profile.name!r}", self.profile.profile, M, R, X, Z, **kwargs)
        if getattr(self.profile, "sets_radius", False) and prof.L is not None:
            L = np.asarray(prof.L, dtype=float)[:, -1]  # a solved star's own luminosity, whatever the relation said
        tr = transport.compute(prof, opacity, L)
        _check_kappa(self.opacity.name, tr.fields["kappa"], prof)
        return prof, tr

    def validity_messages(self, values: dict, profile: Profile | None = None) -> list[str]:
        """Plain-language notes where a component is used outside its stated range."""
        from radwalk.host.validity import outside_validity

        msgs = []
        for stage in ("relation", "profile"):
            comp = getattr(self, stage)
            msg = outside_validity(comp, X=values["X"], Z=values["Z"], mass=values["mass"],
                                   name=f"{stage} {comp.name!r}")
            if msg:
                msgs.append(msg)
        if profile is not None:
            msgs += self.opacity_range_messages(profile.rho, profile.T, profile.X, profile.Z, profile.m)
        return msgs

    def opacity_range_messages(self, rho, T, X, Z, m) -> list[str]:
        """A note when more than :data:`OPACITY_MASS_THRESHOLD` of the stars' mass lies outside the opacity
        law's stated (rho, T) range.

        Parameters
        ----------
        rho, T : ndarray [n, g], g/cm^3 and K
        X, Z : ndarray [n]
        m : ndarray [n, g]
            Mass inside each point, in any unit (only its increments weigh the points).
        """
        from radwalk.host.validity import fraction_outside, outside_validity

        args = (self.opacity, rho, T, np.asarray(X, dtype=float)[:, None], np.asarray(Z, dtype=float)[:, None])
        weights = np.maximum(np.diff(m, axis=1, prepend=0.0), 0.0)
        if fraction_outside(*args, weights)[0] > OPACITY_MASS_THRESHOLD:
            return [outside_validity(*args, weights, name=f"opacity {self.opacity.name!r}")]
        return []


# An opacity law is reported as out of range when more than this fraction of the star's mass
# lies outside its stated (rho, T) range: a polytrope's outermost layers always do.
OPACITY_MASS_THRESHOLD = 0.01


def _check_kappa(name: str, kappa, prof: Profile):
    """ModelError naming the first layer (rho, T, r/R of which star) where kappa [n, g] is not finite and > 0."""
    bad = ~np.isfinite(kappa) | ~(kappa > 0)
    if bad.any():
        i, j = (int(v) for v in np.argwhere(bad)[0])
        value = float(kappa[i, j])
        shown = "NaN" if np.isnan(value) else f"{value:.4g} cm^2/g"
        rho, T = float(np.asarray(prof.rho)[i, j]), float(np.asarray(prof.T)[i, j])
        r_rel = float(np.asarray(prof.r)[i, j] / np.asarray(prof.r)[i, -1])
        mass = float(np.ravel(prof.M)[i]) / k.M_SUN
        raise ModelError(
            f"opacity {name!r} gave kappa={shown} at rho={rho:.4g} g/cm^3, T={T:.4g} K, r/R={r_rel:.4g} of a "
            f"{mass:.4g} M_sun star ({int(bad[i].sum())} of its {bad.shape[1]} layers); an opacity must be finite "
            "and positive in every layer, also outside its stated range: `radwalk check-plugin` checks it"
        )
