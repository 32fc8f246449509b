"""The Python API for notebooks: :func:`fit` one star, :func:`model` one star of given mass.

Both take plain numbers in solar units and kelvin, or astropy Quantities in
any compatible unit, and raise :class:`radwalk.errors.RadwalkError` (with the
same one-line messages as the command line) for bad input::

    import radwalk
    res = radwalk.fit(radius=(1.02, 0.02), luminosity=(1.05, 0.05), teff=(5800, 60), seed=1)
    res.summary["parameters"]["mass"]["p50"]        # the same content as summary.json
    res.samples["mass"], res.samples["diffusion_time"]   # QTable columns with units
    res.write("my-star")                            # summary.json, chain.h5 and the plots
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = ["fit", "model", "FitResult", "ModelResult"]


def _astropy_unit(text: str):
    """An astropy unit from a catalogue unit string ("R_sun", "g / cm3"; "" is a pure number)."""
    import astropy.units as u

    return u.Unit(text) if text else u.dimensionless_unscaled


def _number(name: str, value) -> float:
    """A float in radwalk's user unit (the quantity catalogue's; [Fe/H] in dex) from a number or a Quantity."""
    import astropy.units as u

    from radwalk.errors import ConfigError
    from radwalk.forward.quantities import quantity

    if isinstance(value, u.Quantity):
        unit = "" if name == "feh" else quantity(name).output_unit
        try:
            return float(value.to_value(_astropy_unit(unit)))
        except u.UnitConversionError:
            raise ConfigError(f"{name} in {value.unit} cannot be converted to {unit or 'a pure number'}") from None
    try:
        return float(value)
    except (TypeError, ValueError):
        raise ConfigError(f"{name} must be a number or an astropy Quantity, got {value!r}") from None


def _pair(name: str, pair) -> tuple[float, float] | tuple[None, None]:
    """(value, error) in user units; None means not measured."""
    from radwalk.errors import ConfigError

    if pair is None:
        return None, None
    try:
        value, err = pair
    except (TypeError, ValueError):
        raise ConfigError(f"{name} must be a pair (value, error), got {pair!r}") from None
    return _number(name, value), _number(name, err)


def _config(config, seed, opacity):
    """A RunConfig from None, a TOML path, a dict or a RunConfig, with seed and opacity laid over it."""
    from radwalk.errors import ConfigError
    from radwalk.host import config as config_mod

    if config is None:
        cfg = config_mod.RunConfig()
    elif isinstance(config, config_mod.RunConfig):
        cfg = config
    elif isinstance(config, dict):
        cfg = config_mod.from_dict(config)
    elif isinstance(config, (str, Path)):
        cfg = config_mod.load(config)
    else:
        raise ConfigError(f"config must be None, a TOML path, a dict or a RunConfig, got {type(config).__name__}")
    changes = {}
    if seed is not None:
        if int(seed) != seed or seed < 0:
            raise ConfigError(f"seed must be a non-negative integer, got {seed!r}")
        changes["seed"] = int(seed)
    if opacity is not None:
        names = (opacity,) if isinstance(opacity, str) else tuple(opacity)
        changes["stages"] = {**cfg.stages, "opacity": names[0] if len(names) == 1 else names}
    return cfg.with_changes(**changes) if changes else cfg


@dataclass
class FitResult:
    """One star's posterior.

    Attributes
    ----------
    summary : dict
        The same document a fit writes as summary.json (strict JSON content).
    samples : astropy.table.QTable
        The thinned posterior samples on which the derived quantities were
        computed: every sampled parameter (and those drawn from their priors)
        and every derived quantity, with units.  [nsamples] rows.
    chain : radwalk.inference.sampler.Chain
        The full chain: ``chain.chain`` [steps, walkers, ndim], ``log_prob``, ``tau``, ``burn``, ``thin``.
    """

    summary: dict
    samples: object
    chain: object
    _products: object
    _config: object

    def write(self, folder) -> Path:
        """Writes summary.json, chain.h5 and the star's plots into ``folder`` (created); returns the folder."""
        from radwalk.report.figures import write_star_plots
        from radwalk.results.chain import write_chain_file
        from radwalk.results.files import write_json
        from radwalk.results.layout import STAR_SUMMARY, chain_file_name

        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        # the command line's chain file: units, burn-in, seed, versions and the derived samples beside the chain
        write_chain_file(folder / chain_file_name(self._products.opacity, primary=True), self._products,
                         self.summary, self._config.seed)
        doc = dict(self.summary)
        doc["plots"] = write_star_plots(self._products, folder)
        write_json(folder / STAR_SUMMARY, doc)
        return folder


def _samples_table(products):
    from astropy.table import QTable

    from radwalk.forward.quantities import output_unit

    rows = products.derived_rows
    t = QTable()
    for j, name in enumerate(products.param_names):
        t[name] = products.samples[rows, j] * _astropy_unit(products.param_units[j] or "")
    for name, values in products.derived.items():
        t[name] = np.asarray(values, dtype=float) * _astropy_unit(output_unit(name))
    return t


def fit(radius=None, luminosity=None, teff=None, feh=None, *, id="star", config=None, seed=None,
        opacity=None) -> FitResult:
    """Samples one star's posterior and derives its interior and timescales.

    Parameters
    ----------
    radius, luminosity, teff : (value, error), optional
        R in R_sun, L in L_sun, T_eff in K, as numbers or astropy Quantities; at least two.
    feh : (value, error), optional
        [Fe/H] in dex, a prior on Z.
    id : str
        The star's name (in the summary and the plots).
    config : None, str or Path, dict, or RunConfig
        A run configuration (the TOML file `radwalk fit --config` takes, its content as a dict, or an object).
    seed : int, optional
        Replaces the configuration's seed.
    opacity : str or list of str, optional
        Opacity law; several are fitted and compared, the first is primary.

    Returns
    -------
    FitResult

    Raises
    ------
    radwalk.errors.RadwalkError
        Bad input, an unknown component, or a star no model reaches.
    """
    import warnings

    from radwalk.errors import ValidityWarning
    from radwalk.inference.fit import StarResult, fit_laws
    from radwalk.inference.star import Star
    from radwalk.results.document import result_document
    from radwalk.results.files import strict

    cfg = _config(config, seed, opacity)
    values = {}
    for name, pair in (("radius", radius), ("luminosity", luminosity), ("teff", teff)):
        values[name], values[f"{name}_err"] = _pair(name, pair)
    feh_value, feh_err = _pair("feh", feh)
    star = Star.from_user_units(str(id), **values, feh=feh_value, feh_err=feh_err)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ValidityWarning)  # they are in summary["warnings"]
        summary, products = fit_laws(star, cfg)
    status = "ok" if summary["sampler"]["converged"] else "not-converged"
    reason = "" if status == "ok" else summary["sampler"]["reason"]
    doc = strict(result_document(star, cfg, StarResult(star.id, status, reason, summary)))  # as summary.json
    primary = next(iter(products.values()))  # the first law that fitted
    return FitResult(summary=doc, samples=_samples_table(primary), chain=primary.chain, _products=primary,
                     _config=cfg)


@dataclass
class ModelResult:
    """The forward model of one star.

    Attributes
    ----------
    summary : dict
        The same object ``radwalk model --json`` prints.
    profile : astropy.table.QTable
        The radial profile, centre first, with units.
    warnings : list of str
        Validity notes (a law used outside its range).
    """

    summary: dict
    profile: object
    warnings: list


def model(mass, X=None, Z=None, *, age=None, profile=None, opacity=None, relation=None, settings=None,
          plugins=()) -> ModelResult:
    """Interior and timescales of one star of given mass and composition.

    Parameters
    ----------
    mass : float or Quantity, M_sun
    X, Z : float, optional
        Hydrogen and metal mass fractions.  Default, for models with a composition rule (the default track
        grid): X by the rule at the given Z, or at the calibrated Sun's initial Z when none is given, so
        ``model(1, age=4.57)`` is the calibrated Sun; for other models, the solar surface values of Asplund
        et al. (2009).
    age : float or Quantity, Gyr, optional
        Age since the zero-age main sequence (default 0).  With a profile or relation named that has no age
        (a polytrope, homology) the solved star is used for the other.
    profile, opacity, relation : str, optional
        Component names (default: the stage table's defaults).
    settings : dict, optional
        Component parameters and options by name, e.g. ``{"n": 1.5}``.
    plugins : sequence of str
        Plugin files to load.

    Returns
    -------
    ModelResult
    """
    import astropy.units as u
    from astropy.table import QTable

    if isinstance(mass, u.Quantity):
        mass = mass.to_value(u.Msun)
    if isinstance(age, u.Quantity):
        age = age.to_value(u.Gyr)
    stages = {k: v for k, v in (("profile", profile), ("opacity", opacity), ("relation", relation)) if v}
    interior = one_star(mass, X, Z, stages=stages, settings=settings, plugins=plugins, age=age)
    return ModelResult(summary=interior.summary, profile=QTable(interior.profile_table),
                       warnings=interior.warnings)


def one_star(mass, X=None, Z=None, *, stages=None, settings=None, plugins=(), age=None, radius=None,
             luminosity=None):
    """The forward model of one star from component names, as `radwalk model` and :func:`model` take them.

    Parameters
    ----------
    mass : float, M_sun
    X, Z : float, optional
        Default: see :func:`model`.
    stages : dict, optional
        Stage name -> component name.
    settings : dict, optional
        Component parameters and options by name (strings or numbers).
    plugins : sequence of str
        Plugin files.
    age : float, Gyr, optional
        Sets the ``age`` parameter; stages left unnamed become models with an age (the defaults are).  When
        the default track-grid stages have no grid for the chosen opacity law yet, the star is solved
        directly instead (a note says so).
    radius, luminosity : float, optional
        R_sun and L_sun replacing the relation's (polytrope profiles only).

    Returns
    -------
    radwalk.forward.one_star.Interior
    """
    from radwalk.constants import X_SUN, Z_SUN
    from radwalk.forward.one_star import model_star, with_age
    from radwalk.host.config import RunConfig
    from radwalk.inference.fit import stages_for
    from radwalk.physics.structure.calibration import CALIBRATED_ALPHA, CALIBRATED_Y0, composition_from_helium

    stages = dict(stages or {})
    named = set(stages)  # what the caller chose, before the age fills in models with a history
    settings = dict(settings or {})
    if age is not None:
        with_age(stages, settings, float(age))
    plugin_paths = tuple(str(Path(p).expanduser().resolve()) for p in plugins)
    built = stages_for(RunConfig(stages=stages, settings=settings, plugins=plugin_paths))
    params = {k: v for k, v in settings.items() if k not in built.option_names()}
    note = None
    if _no_grid_yet(built, named, params):
        # One star of a law without a grid: solving it directly takes seconds, building the law's grid an hour.
        stages.update({s: "solved" for s in ("profile", "relation") if s not in named})
        settings.setdefault("alpha_mlt", CALIBRATED_ALPHA)  # the solved stages' own default is a textbook value
        built = stages_for(RunConfig(stages=stages, settings=settings, plugins=plugin_paths))
        params = {k: v for k, v in settings.items() if k not in built.option_names()}
        note = (f"no track grid for opacity {built.opacity.name!r} yet: this star was solved directly (profile and "
                "relation 'solved', alpha_mlt of the calibrated Sun); `radwalk grid build --opacity "
                f"{built.opacity.name}` makes the grid")
    if X is None and built.hydrogen_stage() is not None:
        # A model with a composition rule: X by its own rule, at the calibrated Sun's initial Z if none is given.
        Z = composition_from_helium(CALIBRATED_Y0)[1] if Z is None else float(Z)
        values = {**built.defaults(), **{k: built.param(k).check(v) for k, v in params.items()}, "Z": Z}
        X = float(built.hydrogen_fraction(values)[0])
    interior = model_star(built, float(mass), X_SUN if X is None else float(X), Z_SUN if Z is None else float(Z),
                          params, radius=radius, luminosity=luminosity)
    if note:
        interior.summary["warnings"].insert(0, note)  # the same list as interior.warnings
    return interior


def _no_grid_yet(built, named: set, params: dict) -> bool:
    """Whether a default (not named) grid-backed stage would have to build its grid first."""
    for stage in ("relation", "profile"):
        comp = getattr(built, stage)
        available = getattr(comp, "grid_available", None)
        if stage in named or available is None:
            continue
        values = {**built.defaults(), **{k: built.param(k).check(v) for k, v in params.items()}}
        if not available(built.bound_opacity(values)):
            return True
    return False
