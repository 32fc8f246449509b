"""The quantity catalogue: every named quantity's units, words, LaTeX symbol and report group, in one table.

The fit (units in summary.json), ``radwalk model`` (its table), the figures
(axis labels) and the report (words, groups, units as HTML) all read this
table.  Each quantity is computed in ``unit`` (the transport quantities by
:func:`radwalk.physics.transport.compute`, cgs except the timescales in yr or
s; the parameters in their own units) and shown in ``output_unit``; one
output unit is ``scale`` computed units (``R_sun`` is ``R_SUN`` cm).

Quantities that plugins add through the ``radwalk_derived_quantities`` hook
are not in the table; :func:`register_plugin_quantity` records their unit for
the process that computed them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from radwalk import constants as k


@dataclass(frozen=True)
class Quantity:
    """One named quantity.

    Attributes
    ----------
    name : str
        Key in summary.json, the summary table and the transport scalars.
    unit : str
        Unit the value is computed in ("" for a pure number).
    output_unit : str
        Unit of documents, tables and plots.
    scale : float
        Size of one output unit in computed units (output = value / scale).
    description : str
        Plain words for the report's tables.
    short : str
        Shorter words for ``radwalk model``'s table.
    symbol : str
        LaTeX (mathtext) symbol, with dollars, no unit.
    group : str
        Section of the report (one of :data:`GROUPS`).
    plain : str
        Plain-text symbol (``M``, ``T_eff``); empty when there is none.
    label : str
        Axis label with unit, when it is not ``symbol`` followed by the unit.
    """

    name: str
    unit: str
    output_unit: str
    scale: float
    description: str
    short: str
    symbol: str
    group: str
    plain: str = ""
    label: str = ""

    @property
    def factor(self) -> float:
        """Multiplier from computed to output units (1 / scale)."""
        return 1.0 / self.scale

    def to_output(self, value):
        """``value`` in the computed unit, returned in the output unit."""
        return value / self.scale


PARAMETERS, TIMESCALES_GROUP, CENTRE, GLOBAL, CONVECTION = (
    "Parameters", "Timescales", "Centre", "Surface and global", "Convection")
GROUPS = (PARAMETERS, TIMESCALES_GROUP, CENTRE, GLOBAL, CONVECTION)


def _q(name, unit, description, short, symbol, group, output_unit=None, scale=1.0, plain="", label=""):
    return Quantity(name, unit, unit if output_unit is None else output_unit, scale, description, short, symbol,
                    group, plain, label)


# In report order within each group.
CATALOGUE: dict[str, Quantity] = {q.name: q for q in (
    _q("mass", "M_sun", "mass", "mass", r"$M$", PARAMETERS, plain="M"),
    _q("X", "", "hydrogen mass fraction", "hydrogen mass fraction", r"$X$", PARAMETERS, plain="X"),
    _q("Z", "", "metal mass fraction", "metal mass fraction", r"$Z$", PARAMETERS, plain="Z"),
    _q("n", "", "polytropic index", "polytropic index", r"$n$", PARAMETERS, plain="n"),
    _q("alpha_mlt", "", "mixing-length parameter", "mixing-length parameter", r"$\alpha_\mathrm{MLT}$", PARAMETERS,
       plain="alpha"),
    _q("age", "Gyr", "age since the zero-age main sequence", "age", r"$t$", PARAMETERS, plain="t"),

    _q("diffusion_time", "yr", "photon diffusion time, centre to surface", "photon diffusion time",
       r"$t_\mathrm{diff}$", TIMESCALES_GROUP),
    _q("diffusion_time_radiative_core", "yr",
       "photon diffusion time through the radiative zone alone (centre or convective-core edge to the "
       "convective-envelope base)", "through the radiative zone alone", r"$t_\mathrm{diff,rad}$", TIMESCALES_GROUP),
    _q("convective_crossing_time", "yr", "time convective eddies take to cross the convective layers "
       "(integral of dr/v, mixing-length velocities)", "convective crossing time", r"$t_\mathrm{conv}$",
       TIMESCALES_GROUP),
    _q("energy_transport_time", "yr", "energy-transport (thermal) time U/L: the heat content over the luminosity",
       "energy-transport (thermal) time U/L", r"$t_\mathrm{th}$", TIMESCALES_GROUP),
    _q("diffusion_time_uniform", "yr", "uniform-density estimate R^2 kappa rho / c", "uniform-density estimate",
       r"$t_\mathrm{diff,uni}$", TIMESCALES_GROUP),
    _q("kelvin_helmholtz_time", "yr", "Kelvin-Helmholtz time |Omega|/(2L)", "Kelvin-Helmholtz time",
       r"$t_\mathrm{KH}$", TIMESCALES_GROUP),
    _q("dynamical_time", "s", "dynamical time sqrt(R^3/GM)", "dynamical time", r"$t_\mathrm{dyn}$",
       TIMESCALES_GROUP),
    _q("main_sequence_lifetime", "Gyr", "main-sequence lifetime: age at which the central hydrogen fraction "
       "falls to 0.01", "main-sequence lifetime", r"$t_\mathrm{MS}$", TIMESCALES_GROUP),

    _q("central_density", "g / cm3", "central density", "central density", r"$\rho_c$", CENTRE),
    _q("central_temperature", "K", "central temperature", "central temperature", r"$T_c$", CENTRE),
    _q("central_pressure", "dyn / cm2", "central pressure", "central pressure", r"$P_c$", CENTRE),
    _q("central_hydrogen", "", "hydrogen mass fraction at the centre", "central hydrogen", r"$X_c$", CENTRE),
    _q("mean_free_path_center", "cm", "photon mean free path at the centre", "photon mean free path at centre",
       r"$\lambda_c$", CENTRE),

    _q("radius", "cm", "radius (model)", "radius", r"$R$", GLOBAL, "R_sun", k.R_SUN, plain="R",
       label=r"$R\,[R_\odot]$"),
    _q("luminosity", "erg / s", "luminosity (model)", "luminosity", r"$L$", GLOBAL, "L_sun", k.L_SUN, plain="L",
       label=r"$L\,[L_\odot]$"),
    _q("teff", "K", "effective temperature (model)", "effective temperature", r"$T_\mathrm{eff}$", GLOBAL,
       plain="T_eff", label=r"$T_\mathrm{eff}\,[\mathrm{K}]$"),
    _q("photosphere_radius", "cm", "radius where tau = 2/3", "photosphere (tau = 2/3)", r"$r_{\tau=2/3}$", GLOBAL,
       "R_sun", k.R_SUN),
    _q("mu", "", "mean molecular weight", "mean molecular weight", r"$\mu$", GLOBAL),
    _q("eddington_luminosity", "erg / s", "Eddington luminosity (Thomson opacity)", "Eddington luminosity",
       r"$L_\mathrm{Edd}$", GLOBAL, "L_sun", k.L_SUN),
    _q("eddington_ratio", "", "L / L_Edd", "L / L_Edd", r"$L/L_\mathrm{Edd}$", GLOBAL),

    _q("core_convective_radius", "", "outer edge of a convective core in r/R (0: none)", "convective core edge",
       r"$r_\mathrm{cc}/R$", CONVECTION),
    _q("convective_envelope_base_radius", "", "base of the convective envelope in r/R (1: none)",
       "convective envelope base", r"$r_\mathrm{ce}/R$", CONVECTION),
    _q("convective_mass_fraction", "", "fraction of the mass in convective layers", "convective mass fraction",
       r"$M_\mathrm{conv}/M$", CONVECTION),
    _q("convective_core_mass_fraction", "", "mass of the convective core over M (0: none)",
       "convective core mass fraction", r"$M_\mathrm{cc}/M$", CONVECTION),
    _q("convective_envelope_base_mass_fraction", "", "mass inside the base of the convective envelope over M "
       "(1: none)", "convective envelope base (m/M)", r"$m_\mathrm{ce}/M$", CONVECTION),
    _q("convective_turnover_time", "d", "local convective turnover time, mixing length over velocity half a "
       "pressure scale height above the envelope base", "convective turnover time (local)", r"$\tau_c$",
       CONVECTION),
    _q("convective_turnover_time_global", "d", "global convective turnover time, integral of dr/v over the "
       "convective envelope", "convective turnover time (global)", r"$\tau_{c,g}$", CONVECTION),
)}

# The timescales of the per-star corner plot (the uniform-density estimate is a cross-check, not drawn).
# The energy-transport time is in the tables, not here: for most models it is within a few per cent of the
# Kelvin-Helmholtz time (both measure the heat content over L), and a second, nearly equal axis says nothing.
TIMESCALES = ("diffusion_time", "diffusion_time_radiative_core", "kelvin_helmholtz_time", "dynamical_time")

# Units as HTML, for the report; other units are shown as written.
UNIT_HTML = {
    "R_sun": "R<sub>☉</sub>", "L_sun": "L<sub>☉</sub>", "M_sun": "M<sub>☉</sub>",
    "g / cm3": "g cm<sup>−3</sup>", "dyn / cm2": "dyn cm<sup>−2</sup>", "erg / s": "erg s<sup>−1</sup>",
}

# Views of the table for the report.
DERIVED_GROUPS = tuple((g, tuple(n for n, q in CATALOGUE.items() if q.group == g)) for g in GROUPS[1:])
PARAM_WORDS = {n: q.description for n, q in CATALOGUE.items() if q.group == PARAMETERS}
PARAM_SYMBOL = {n: q.plain for n, q in CATALOGUE.items() if q.group == PARAMETERS}
OBS_SHORT = {n: CATALOGUE[n].plain for n in ("radius", "luminosity", "teff")}

# Units of quantities plugins added in this process (name -> unit).
PLUGIN_UNITS: dict[str, str] = {}


def quantity(name: str) -> Quantity:
    """The catalogue entry of ``name`` (KeyError when it has none)."""
    return CATALOGUE[name]


def register_plugin_quantity(name: str, unit: str) -> None:
    """Records the unit of a quantity a plugin computed (it has no catalogue entry)."""
    PLUGIN_UNITS[name] = str(unit)


def output_unit(name: str) -> str:
    """Unit of ``name`` in documents and plots (KeyError for a name nobody described)."""
    if name in CATALOGUE:
        return CATALOGUE[name].output_unit
    return PLUGIN_UNITS[name]


def latex_symbol(name: str) -> str:
    """Mathtext symbol of a catalogue quantity."""
    return CATALOGUE[name].symbol


def latex_label(name: str) -> str:
    """Axis label with the unit in brackets; a plugin quantity gets its name in words."""
    q = CATALOGUE.get(name)
    if q is not None and q.label:
        return q.label
    unit = output_unit(name)
    base = q.symbol if q is not None else name.replace("_", " ")
    return f"{base}$\\,[\\mathrm{{{unit.replace(' ', '')}}}]$" if unit else base


def description(name: str) -> str:
    """Report words for ``name``; a name outside the catalogue in plain words."""
    q = CATALOGUE.get(name)
    return q.description if q is not None else name.replace("_", " ")


def plain_unit(unit: str) -> str:
    """A unit in compact text: ``g / cm3`` -> ``g/cm^3``."""
    text = re.sub(r"\s*/\s*", "/", unit.strip())
    return re.sub(r"(?<=[A-Za-z])(\d+)", r"^\1", text)
