"""`radwalk report DIR`: a static HTML report built from the files of a run folder.

The report is read from what a run leaves on disk (``stars/*/summary.json``,
``run.toml``, ``summary.ecsv`` and the PNGs), so it can be rebuilt for a
finished or a partial run.  It opens from the file system with no server and
no network: no external CSS, scripts or fonts, relative links only.  Every
piece of text that comes from the catalog or the files is HTML-escaped, and a
Content-Security-Policy lets only the report's own inline script run, so an
id such as ``<script>...</script>`` is shown as text and can never execute.

The pages are Jinja2 templates with autoescape (``templates/*.html.j2``); the
style sheet and the sorting script are files beside them, inlined into each
page, the script allowed by the sha256 of the file's text.  This module reads
the run folder into plain values for the templates; the number and unit
formatting (:func:`num`, :func:`interval`, :func:`like`, :func:`plus_minus`,
:func:`unit_html`) are its template filters; a value with an interval is shown
to the digits its interval supports.

Layout written::

    DIR/report/index.html          catalog page
    DIR/report/<safe-id>.html      one page per star (safe id = its folder under stars/)
    DIR/report/hr_diagram.png      catalog plots (radwalk.report.figures.write_catalog_plots)
    DIR/report/timescales_vs_mass.png
    DIR/report/mass_recovery.png   only with the catalog's true masses (radwalk.report.truths)
"""

from __future__ import annotations

import base64
import hashlib
import json
import math
import os
import sys
import warnings
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from urllib.parse import quote

import numpy as np
from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup, escape

from radwalk import __version__
from radwalk.errors import ConfigError
from radwalk.forward.quantities import DERIVED_GROUPS, OBS_SHORT, PARAM_SYMBOL, PARAM_WORDS, UNIT_HTML, description
from radwalk.report.truths import mass_recovery
from radwalk.results.document import PPC_POOR
from radwalk.results.files import write_text
from radwalk.results.layout import CHAIN_FILE, RUN_TOML, SUMMARY_ECSV, SUMMARY_FITS, safe_folder_name

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

# The statuses a star is shown with; "poor-fit" is a converged ("ok") star whose posterior-predictive
# check failed (summary.json keeps its status "ok" and says so in a warning).
STATUSES = ("ok", "poor-fit", "not-converged", "failed", "pending", "unreadable")
STATUS_TEXT = {
    "ok": "ok", "poor-fit": "poor fit", "not-converged": "not converged", "failed": "failed",
    "pending": "not finished", "unreadable": "unreadable",
}

# Star plots in page order: kind -> (title, caption); file names come from summary.json's `plots`.
STAR_PLOTS = {
    "corner_parameters": ("Posterior of the sampled parameters",
                          "One- and two-dimensional marginals of the parameters the sampler explored."),
    "corner_timescales": ("Posterior of the timescales",
                          "Photon diffusion, Kelvin–Helmholtz and dynamical times and their correlations."),
    "trace": ("Trace of the walkers", "Every walker's position against step; the burn-in is discarded."),
    "profile": ("Interior profiles", "Posterior bands (68 % and 95 %) of the radial structure; convective "
                "layers shaded (darker where most samples are convective)."),
    "predictive": ("Posterior-predictive check",
                   "Observed R, L, T_eff against the values the posterior predicts."),
    "opacity_comparison": ("Opacity laws compared", "The same star fitted under each opacity law."),
}
CATALOG_PLOTS = {
    "hr_diagram": ("Hertzsprung–Russell diagram",
                   "Observed stars with error bars and the posterior-predictive positions.", "hr_diagram.png"),
    "timescales_vs_mass": ("Timescales against mass",
                           "Photon diffusion time, energy-transport (thermal) time U/L and Kelvin–Helmholtz time, "
                           "and the main-sequence lifetime where the model has one, with 68 % credible "
                           "intervals.", "timescales_vs_mass.png"),
}

# Catalog plots drawn only when the catalog's true parameters are known (radwalk.report.truths).
TRUTH_PLOTS = {
    "mass_recovery": ("Recovered against true mass",
                      "Posterior median of each star's mass with its 68 % (dark) and 95 % (light) intervals against "
                      "the true mass the invented star was made with; the dashed line is recovered = true.  Open "
                      "circles did not converge.", "mass_recovery.png"),
}

# Observations table rows: (key, words, unit); the symbol after the words is the catalogue's (OBS_SHORT).
OBSERVABLE_ROWS = (("radius", "Radius", "R_sun"), ("luminosity", "Luminosity", "L_sun"),
                   ("teff", "Effective temperature", "K"))

# Catalog table columns: (header symbol, a "_" starting its subscript; unit; where in summary.json; name).
# The names are summary.json's (the quantity catalogue's, the keys of `radwalk model --json` without their
# unit suffix).
CATALOG_COLUMNS = (
    ("M", "M_sun", "parameters", "mass"),
    ("R", "R_sun", "derived", "radius"),
    ("L", "L_sun", "derived", "luminosity"),
    ("T_eff", "K", "derived", "teff"),
    ("age", "Gyr", "parameters", "age"),
    ("t_MS", "Gyr", "derived", "main_sequence_lifetime"),
    ("X_c", "", "derived", "central_hydrogen"),
    ("t_diff", "yr", "derived", "diffusion_time"),
    ("t_th", "yr", "derived", "energy_transport_time"),
    ("t_KH", "yr", "derived", "kelvin_helmholtz_time"),
)
# Columns shown only when some star has a value (a polytrope has no age, lifetime or evolved centre).
OPTIONAL_COLUMNS = ("age", "main_sequence_lifetime", "central_hydrogen")

# The run's files the catalog page links for download: (name, what it holds).
DOWNLOADS = ((SUMMARY_ECSV, "the table of stars (ECSV: plain text with units, read by astropy)"),
             (SUMMARY_FITS, "the same table as FITS"),
             (RUN_TOML, "the run's configuration and provenance"))

# The page templates, the style sheet and the sorting script (package data).
TEMPLATES = Path(__file__).with_name("templates")


@dataclass
class StarEntry:
    """One star as found in the run folder."""

    id: str
    folder: str  # name of its folder under stars/
    status: str  # ok, not-converged, failed, pending (no summary.json yet), unreadable
    summary: dict | None
    problem: str = ""  # why a pending / unreadable star has no summary

    @property
    def ppc_pvalue(self) -> float | None:
        """The posterior-predictive p-value of a fitted star, None when it has none."""
        p = (self.summary or {}).get("ppc_pvalue") if self.status != "failed" else None
        return float(p) if _finite(p) else None

    @property
    def poor_fit(self) -> bool:
        """Its posterior-predictive check failed (p-value under PPC_POOR): never shown as a plain "ok"."""
        return self.ppc_pvalue is not None and self.ppc_pvalue < PPC_POOR

    @property
    def shown_status(self) -> str:
        """The status its badge and table row show: a converged star whose check failed is "poor-fit"."""
        return "poor-fit" if self.status == "ok" and self.poor_fit else self.status

    @property
    def page(self) -> str | None:
        """File name of its page in report/ (None when it has no page)."""
        if self.summary is None:
            return None
        return star_page_name(self.folder)


def star_page_name(folder: str) -> str:
    """The report page of a star folder; a star folder named 'index' must not replace the catalog page."""
    if folder.lower() == "index":
        return "_index.html"  # safe_folder_name never starts a name with '_'
    return f"{folder}.html"


# ---------------------------------------------------------------- reading the run folder


def _read_summary(path: Path) -> dict:
    # missing numbers are null; json also reads the NaN of folders written before strict JSON
    return json.loads(path.read_text(encoding="utf-8"))


def _catalog_order(out_dir: Path) -> list[tuple[str, str]] | None:
    """(id, folder) of every star in the order of summary.ecsv, or None without one."""
    path = out_dir / "summary.ecsv"
    if not path.is_file():
        return None
    try:
        from astropy.table import Table

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # a unit astropy does not know must not stop a report
            table = Table.read(path, format="ascii.ecsv")
        ids = [str(x) for x in table["id"]]
        folders = [str(x) for x in table["folder"]] if "folder" in table.colnames else [""] * len(ids)
    except Exception:  # noqa: BLE001 - an unreadable table only loses the order, not the report
        return None
    order = [(sid, folder if folder and "/" not in folder and folder not in (".", "..") else safe_folder_name(sid))
             for sid, folder in zip(ids, folders)]
    return list(dict.fromkeys(order))  # a run comparing opacity laws has a row per star and law


def load_stars(out_dir) -> list[StarEntry]:
    """Every star of a run folder, in catalog order (summary.ecsv), else sorted by id."""
    out_dir = Path(out_dir)
    stars_dir = out_dir / "stars"
    found: dict[str, StarEntry] = {}
    if stars_dir.is_dir():
        for folder in sorted(p for p in stars_dir.iterdir() if p.is_dir()):
            path = folder / "summary.json"
            if not path.is_file():
                found[folder.name] = StarEntry(folder.name, folder.name, "pending", None,
                                               "started but not finished (no summary.json yet)")
                continue
            try:
                summary = _read_summary(path)
                if not isinstance(summary, dict):
                    raise ValueError("not a JSON object")
            except (OSError, ValueError) as exc:
                found[folder.name] = StarEntry(folder.name, folder.name, "unreadable", None,
                                               f"summary.json cannot be read: {exc}")
                continue
            status = str(summary.get("status", "unreadable"))
            if status not in ("ok", "not-converged", "failed"):
                status = "unreadable"
            found[folder.name] = StarEntry(str(summary.get("id", folder.name)), folder.name, status, summary,
                                           "" if status != "unreadable" else "summary.json has no valid status")
    order = _catalog_order(out_dir)
    entries = []
    for sid, name in order or ():
        if name in found:
            entry = found.pop(name)
            if entry.summary is None:
                entry.id = sid  # an unfinished star's folder name is not its id
            entries.append(entry)
        else:
            entries.append(StarEntry(sid, name, "pending", None, "not started"))
    entries += sorted(found.values(), key=lambda e: (e.id, e.folder))
    return entries


def read_run_toml(out_dir: Path) -> tuple[dict, str, str]:
    """(parsed run.toml, its text, a problem message) - empty when missing or unreadable."""
    path = out_dir / "run.toml"
    if not path.is_file():
        return {}, "", "no run.toml in this folder"
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        return {}, "", f"run.toml cannot be read: {exc.strerror}"
    try:
        return tomllib.loads(text), text, ""
    except tomllib.TOMLDecodeError as exc:
        return {}, text, f"run.toml is not valid TOML: {exc}"


def check_run_folder(out_dir) -> Path:
    """Returns the folder as a Path; raises ConfigError when it is not a radwalk run folder."""
    out_dir = Path(out_dir)
    if not out_dir.is_dir():
        raise ConfigError(f"{out_dir} is not a folder: give the output folder of a radwalk run")
    markers = ("stars", "run.toml", "state.json", "summary.ecsv")
    if not any((out_dir / m).exists() for m in markers):
        raise ConfigError(f"{out_dir} is not a radwalk run folder: it has none of stars/, run.toml, state.json, "
                          "summary.ecsv")
    return out_dir


# ---------------------------------------------------------------- formatting (the template filters) and rendering


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _exponent(x: float) -> int:
    """Power of ten to factor out: none for 1e-3 <= |x| < 1e5, where plain digits read best."""
    if not _finite(x) or x == 0:
        return 0
    e = math.floor(math.log10(abs(x)))
    return e if e < -3 or e >= 5 else 0


def _times_ten(e: int) -> str:
    return f" × 10<sup>{e}</sup>".replace("-", "−") if e else ""


DASH = Markup('<span class="muted">–</span>')  # a missing number


def num(x, digits: int = 4) -> Markup:
    """A number as HTML (a dash when missing); the template filter ``num``."""
    if isinstance(x, bool):
        return Markup("yes" if x else "no")
    if not _finite(x):
        return DASH
    e = _exponent(x)
    m = x / 10.0**e
    if e:
        text = f"{m:.{max(digits - 1, 1)}g}"
    elif abs(m) >= 1000:
        text = f"{m:.0f}"
    else:
        text = f"{m:.{digits}g}"
    return Markup(text.replace("-", "−") + _times_ten(e))


def _precision(p50: float, lo: float, hi: float) -> tuple[int, int] | None:
    """(power of ten factored out, decimals after it) that a value with errors -lo/+hi supports.

    Two significant digits of the smaller error, but never more than two beyond the larger one's (common
    practice, no source): +0.012/-0.011 keeps three decimals, +90000/-14000 rounds to thousands (negative
    decimals).  An error under a hundredth of the other (a posterior piled at a bound) does not count.
    None when neither error is positive.
    """
    # the median sets the power of ten unless it is tiny beside the upper end (a posterior piled at 0)
    top = max(abs(p50 - lo), abs(p50), abs(p50 + hi))
    e = _exponent(p50 if abs(p50) * 100 >= top else top)
    errs = [v / 10.0**e for v in (lo, hi) if _finite(v) and v > 0]
    if not errs:
        return None
    small, large = min(errs), max(errs)
    if small < large / 100:  # a posterior piled at a bound (a fraction at 1): the one real error sets the digits
        small = large
    need_small = 1 - math.floor(math.log10(small))
    need_large = 1 - math.floor(math.log10(large))
    return e, min(min(need_small, need_large + 2), 6)


def _fixed(x: float, e: int, digits: int) -> str:
    """``x / 10**e`` with ``digits`` decimals; negative ``digits`` round to tens, hundreds, ..."""
    m = x / 10.0**e
    if digits < 0:  # round big numbers to the error's digits rather than print noise
        step = 10.0 ** (-digits)
        m = round(m / step) * step
        digits = 0
    text = f"{m:.{digits}f}"
    if text.startswith("-") and float(text) == 0:
        text = text[1:]
    return text.replace("-", "−")


def interval(d: dict | None) -> Markup:
    """Median with the 16th and 84th percentiles as -/+ offsets, as HTML; the template filter ``interval``.

    The median and the offsets are rounded to the digits the offsets support (:func:`_precision`).
    """
    if not d:
        return DASH
    p16, p50, p84 = d.get("p16"), d.get("p50"), d.get("p84")
    if not _finite(p50):
        return DASH
    if not (_finite(p16) and _finite(p84)):
        return num(p50)
    prec = _precision(p50, p50 - p16, p84 - p50)
    if prec is None:
        return num(p50)
    e, digits = prec
    body = (_fixed(p50, e, digits) + f'<span class="pm"><sup>+{_fixed(p84 - p50, e, digits)}</sup>'
            f'<sub>−{_fixed(p50 - p16, e, digits)}</sub></span>')
    return Markup(body + _times_ten(e))


def like(x, d: dict | None) -> Markup:
    """A number of a quantity (a percentile, the MAP) to the precision of the quantity's interval ``d``;
    as :func:`num` when ``d`` has no interval.  The template filter ``like``."""
    if not _finite(x):
        return num(x)
    d = d or {}
    p16, p50, p84 = d.get("p16"), d.get("p50"), d.get("p84")
    prec = _precision(p50, p50 - p16, p84 - p50) if all(_finite(v) for v in (p16, p50, p84)) else None
    if prec is None:
        return num(x)
    e, digits = prec
    return Markup(_fixed(x, e, digits) + _times_ten(e))


def plus_minus(value, error) -> Markup:
    """A measurement "value ± error" as HTML, the value to the error's precision; the filter ``pm``."""
    if not _finite(value):
        return DASH
    if not (_finite(error) and error > 0):
        return num(value)
    e, digits = _precision(value, error, error)
    return Markup(f"{_fixed(value, e, digits)} ± {_fixed(error, e, digits)}{_times_ten(e)}")


def unit_html(unit: str | None) -> Markup:
    """A unit as HTML (R<sub>☉</sub>, g cm<sup>−3</sup>); others escaped as written. The filter ``unit``."""
    if not unit:
        return Markup("")
    return Markup(UNIT_HTML[unit]) if unit in UNIT_HTML else escape(unit)


def _sort_value(x) -> str:
    return repr(float(x)) if _finite(x) else ""


def _href(*parts: str) -> str:
    """A relative URL from path parts, each part percent-encoded (the template escapes it for the attribute)."""
    return "/".join(quote(p, safe="") if p not in ("..", ".") else p for p in parts)


def _script_hash(js: str) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(js.encode("utf-8")).digest()).decode("ascii")


@lru_cache(maxsize=1)
def _environment() -> Environment:
    # Autoescape everywhere: text from the catalog or the files is escaped unless a filter marked it as HTML.
    env = Environment(loader=FileSystemLoader(TEMPLATES), autoescape=True, undefined=StrictUndefined,
                      trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    env.filters.update(num=num, interval=interval, like=like, pm=plus_minus, unit=unit_html)
    env.globals.update(href=_href, status_text=STATUS_TEXT, version=__version__,
                       css=Markup(_asset("report.css")))
    return env


def _asset(name: str) -> str:
    """A style sheet or script of the package, inlined into the pages as it is."""
    text = (TEMPLATES / name).read_text(encoding="utf-8")
    if "</" in text:  # would end the <style> or <script> element early
        raise ValueError(f"{name} must not contain '</'")
    return text


def _render(template: str, script: str = "", **context) -> str:
    """A page from its template; ``script`` (a file in templates/) is inlined and allowed by its sha256."""
    js = _asset(script) if script else ""
    return _environment().get_template(template).render(
        script=Markup(js), script_hash=_script_hash(js) if js else "", **context)


# ---------------------------------------------------------------- catalog page


PROVENANCE_NOT_VERSIONS = ("seed", "catalog", "catalog_sha256", "config_sha256", "plugins", "plugin_sha256",
                           "executor", "workers", "first_started", "started", "finished", "resumed_stars")
CONFIG_SECTIONS = ("stages", "settings", "priors", "sampler", "metallicity", "columns", "run")


def _table(d) -> dict:
    return d if isinstance(d, dict) else {}


def _run_info(out_dir: Path, run: dict, run_text: str, problem: str, entries) -> dict:
    """What the catalog page shows about the run (catalog.html.j2 lays it out)."""
    prov = _table(run.get("provenance"))
    runsec = _table(run.get("run"))
    versions = {k: v for k, v in prov.items() if k not in PROVENANCE_NOT_VERSIONS and not isinstance(v, dict)}
    if not versions:
        found = sorted({str(e.summary.get("radwalk_version")) for e in entries
                        if e.summary and e.summary.get("radwalk_version") is not None})
        if found:
            versions = {"radwalk": ", ".join(found)}
    other = []
    for key, value in run.items():  # any other table a later radwalk adds, shown as it is
        if key in CONFIG_SECTIONS or key == "provenance":
            continue
        text = ", ".join(f"{k} = {v}" for k, v in value.items()) if isinstance(value, dict) else str(value)
        other.append((str(key).replace("_", " ").capitalize(), text))
    return {
        "folder": str(out_dir.resolve()),
        "catalog": str(prov["catalog"]) if prov.get("catalog") else "",
        "catalog_sha": str(prov.get("catalog_sha256", ""))[:12],
        "stages": {str(k): ", ".join(map(str, v)) if isinstance(v, list) else str(v)
                   for k, v in _table(run.get("stages")).items()},
        "has_toml": bool(run),
        "settings": _table(run.get("settings")),
        "priors": {k: _table(v) for k, v in _table(run.get("priors")).items()},
        "seed": runsec.get("seed", prov.get("seed")),
        "plugins": list(runsec.get("plugins") or prov.get("plugins") or []),
        "sampler": _table(run.get("sampler")),
        "executor": prov.get("executor"),
        "workers": prov.get("workers"),
        "ran": bool(prov.get("started") or prov.get("finished")),
        "started": prov.get("started", "?"),
        "finished": prov.get("finished", "?"),
        **_resumed(prov),
        "versions": versions,
        "other": other,
        "problem": problem,
        "text": run_text,
    }


def _resumed(prov: dict) -> dict:
    """Whether the run went on from an earlier one, from run.toml's provenance.

    ``resumed_stars`` counts the stars an earlier run had finished; a fresh run writes 0.  The start times
    alone cannot tell: a fresh run stamps its state a moment after its start, and the two seconds differ now
    and then.  A run.toml written before the count was kept only shows when the folder was first used.
    """
    first = prov.get("first_started")
    count = prov.get("resumed_stars")
    if isinstance(count, int) and not isinstance(count, bool):
        return {"resumed": count if count > 0 else 0, "first_started": first if count > 0 and first else None}
    differs = bool(first) and first != prov.get("started")
    return {"resumed": None, "first_started": first if differs else None}


def _downloads(out_dir: Path) -> list[tuple[str, str, str]]:
    """(name, what it holds, link) of the run's tables and config that exist, linked from report/."""
    return [(name, what, _href("..", name)) for name, what in DOWNLOADS if (out_dir / name).is_file()]


def _catalog_plots(out_dir: Path, report_dir: Path, entries, recovery: list | None = None) -> dict:
    """Draws the catalog plots; (figures: src, title, caption; src empty when no image was written), note."""
    summaries = [e.summary for e in entries if e.summary is not None]
    made: dict = {}
    note = ""
    try:
        from radwalk.report.figures import write_catalog_plots
    except ImportError as exc:
        note = f"Catalog plots are not available: the plotting module could not be loaded ({exc})."
    else:
        try:
            made = dict(write_catalog_plots(summaries, report_dir, recovery or None) or {})
        except Exception as exc:  # noqa: BLE001 - a failed plot must not cost the whole report
            note = f"Catalog plots could not be drawn: {type(exc).__name__}: {exc}"
    figures = []
    kinds = list(CATALOG_PLOTS) + [k for k in made if k not in CATALOG_PLOTS and k not in TRUTH_PLOTS]
    for kind in kinds:
        title, caption, default = CATALOG_PLOTS.get(kind, (kind.replace("_", " ").capitalize(), "", ""))
        name = str(made.get(kind, default))
        path = report_dir / name
        if name and path.is_file() and path.resolve().parent == report_dir.resolve():
            figures.append({"src": _href(name), "title": title, "caption": caption})
        elif not note:
            figures.append({"src": "", "title": title, "caption": caption})
    truth = []  # drawn only for a catalog with its true parameters, shown in their own block
    for kind, (title, caption, name) in TRUTH_PLOTS.items():
        if kind in made and (report_dir / name).is_file():
            truth.append({"src": _href(name), "title": title, "caption": caption})
    return {"figures": figures, "note": note, "truth": truth}


def _law_comparison(report_dir: Path, entries) -> dict | None:
    """The catalog's opacity-law comparison (radwalk.report.law_figures) when the run fitted several laws.

    Returns None for a run of one law; else the figure (src empty when it could
    not be drawn), its caption, and the stars a law could not fit, with why.
    """
    summaries = [e.summary for e in entries if e.summary is not None]
    failed = [(e.id, str(c.get("reason") or f"opacity law {op!r} failed")) for e in entries
              for op, c in ((e.summary or {}).get("comparison") or {}).items()
              if isinstance(c, dict) and c.get("status") == "failed"]
    if not any(len(s.get("comparison") or {}) > 1 for s in summaries):
        return None
    from radwalk.report.law_figures import write_law_figures

    note = ""
    try:
        made = write_law_figures(summaries, report_dir)
    except Exception as exc:  # noqa: BLE001 - a failed plot must not cost the whole report
        made, note = {}, f"The comparison could not be drawn: {type(exc).__name__}: {exc}"
    name = next(iter(made.values()), "")
    return {"src": _href(name) if name else "", "title": "Opacity laws compared",
            "caption": "Posterior medians with 16–84 % intervals of each star's mass and photon diffusion time "
                       "under each compared law against the run's first law (dashed: 1:1), and their ratios "
                       "against the mass. A ratio's bar adds the two intervals' half-widths in ln in "
                       "quadrature, as if the fits were independent (they share the star's data), so it only "
                       "guides the eye.",
            "failed": failed, "note": note}


def _catalog_columns(entries) -> tuple:
    """The CATALOG_COLUMNS to show: every column but an optional one no star has a value for."""
    def has(where, key):
        for e in entries:
            d = ((e.summary or {}).get(where) or {}).get(key) if e.status != "failed" else None
            if isinstance(d, dict) and _finite(d.get("p50")):
                return True
        return False

    return tuple(c for c in CATALOG_COLUMNS if c[3] not in OPTIONAL_COLUMNS or has(c[2], c[3]))


def _catalog_rows(entries, columns=CATALOG_COLUMNS) -> list[dict]:
    """One row of the table of stars per entry; a cell is (sort key, interval dict or None)."""
    rows = []
    for i, e in enumerate(entries, 1):
        s = e.summary or {}
        cells = []
        for _, _, where, key in columns:
            d = (s.get(where) or {}).get(key) if e.status != "failed" else None
            cells.append((_sort_value((d or {}).get("p50")), d))
        nwarn = len(s.get("warnings") or []) if e.summary and e.status != "failed" else ""
        rows.append({"number": i, "id": e.id, "page": e.page, "status": e.shown_status, "ppc": e.ppc_pvalue,
                     "cells": cells,
                     "warnings": nwarn, "reason": str(s.get("reason") or e.problem)})
    return rows


def catalog_page(out_dir: Path, report_dir: Path, entries) -> str:
    """The catalog page (index.html) as HTML; draws the catalog plots into ``report_dir`` on the way."""
    run, run_text, problem = read_run_toml(out_dir)
    counts = {s: sum(e.shown_status == s for e in entries) for s in STATUSES}
    columns = _catalog_columns(entries)
    recovery, truths = mass_recovery(out_dir, run, entries)
    return _render(
        "catalog.html.j2", script="sort.js",
        run_name=out_dir.resolve().name, n_stars=len(entries),
        counts=[(s, counts[s]) for s in STATUSES if counts[s] or s in ("ok", "not-converged", "failed")],
        run=_run_info(out_dir, run, run_text, problem, entries),
        plots=_catalog_plots(out_dir, report_dir, entries, recovery), truths=truths,
        downloads=_downloads(out_dir), laws=_law_comparison(report_dir, entries),
        columns=[(symbol, unit) for symbol, unit, _, _ in columns],
        rows=_catalog_rows(entries, columns),
    )


# ---------------------------------------------------------------- star pages


def _observed_rows(s: dict) -> list[dict]:
    """Rows of the observations table: observed value and error, the model's posterior and the residual."""
    obs = s.get("observed") or {}
    derived = s.get("derived") or {}
    fixed = s.get("fixed") or {}
    rows = []
    for key, label, unit in OBSERVABLE_ROWS:
        o = obs.get(key) or {}
        v, err = o.get("value"), o.get("error")
        d = derived.get(key) or {}
        residual, far = "", False
        # the residual in the fit's own sigma: the measurement and the model's error in quadrature
        floor = fixed.get(f"floor_{key}")
        sigma = math.hypot(err, floor * v) if _finite(floor) and _finite(err) and _finite(v) else err
        # a luminosity the catalog computed from R and T_eff left the likelihood when both were measured
        tied = (key == "luminosity" and bool(s.get("luminosity_derived")) and _finite(v)
                and all(_finite((obs.get(o_) or {}).get("value")) for o_ in ("radius", "teff")))
        if _finite(v) and _finite(sigma) and sigma > 0 and _finite(d.get("p50")):
            z = (d["p50"] - v) / sigma
            residual = f"{z:+.2f} σ".replace("-", "−")
            far = abs(z) > 2  # beyond 2 sigma deserves the eye
        rows.append({"label": label, "symbol": OBS_SHORT[key], "unit": unit, "measured": _finite(v), "value": v,
                     "error": err, "model": d, "model_map": d.get("map"), "residual": residual, "far": far,
                     "note": "derived from R and T_eff; not used in the fit" if tied else ""})
    return rows


def _model_errors(s: dict) -> str:
    """The likelihood's model errors of the fit as words ("R 10.6 %, L 26.8 %, ..."), or "" without any."""
    fixed = s.get("fixed") or {}
    parts = [f"{OBS_SHORT[key]} {100 * fixed[f'floor_{key}']:.3g} %" for key, _, _ in OBSERVABLE_ROWS
             if _finite(fixed.get(f"floor_{key}"))]
    return ", ".join(parts)


def _feh(s: dict) -> tuple | None:
    """(value, error) of the [Fe/H] measurement that set the prior on Z, or None."""
    feh = s.get("feh")
    return tuple(feh) if isinstance(feh, (list, tuple)) and len(feh) == 2 else None


def _words(names: list[str]) -> str:
    words = [f"the {PARAM_WORDS[n]} {PARAM_SYMBOL.get(n, n)}" if n in PARAM_WORDS else f"the parameter {n}"
             for n in names]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def unconstrained_sentence(s: dict) -> str:
    """Plain words for the parameters whose posterior is as wide as their prior (empty if none)."""
    params = s.get("parameters") or {}
    names = s.get("unconstrained")
    if names is None:
        names = [n for n, d in params.items() if not d.get("constrained", True)]
    names = [str(n) for n in names]
    if not names:
        return ""
    by = _measured(s)
    subject = _capital(_words(names))
    if len(names) == 1:
        text = f"{subject} is not constrained by {by}: its interval reflects the prior."
    else:
        text = f"{subject} are not constrained by {by}: their intervals reflect the priors."
    drawn = [n for n in names if (params.get(n) or {}).get("drawn_from_prior")]
    if drawn:
        verb = "does" if len(drawn) == 1 else "do"
        text += (f" {_capital(_words(drawn))} {verb} not change the predicted {by} at all, so the sampler "
                 f"does not explore {'it' if len(drawn) == 1 else 'them'}: the values are drawn from the prior.")
    return text


def _measured(s: dict) -> str:
    obs = s.get("observed") or {}
    measured = [OBS_SHORT[k] for k in ("radius", "luminosity", "teff") if _finite((obs.get(k) or {}).get("value"))]
    return ", ".join(measured) if measured else "the data"


def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


def _parameter_rows(s: dict) -> list[dict]:
    """Rows of the parameters table (statistics, prior and whether the data constrain it)."""
    rows = []
    for name, d in (s.get("parameters") or {}).items():
        rows.append({"symbol": PARAM_SYMBOL.get(name, name), "words": PARAM_WORDS.get(name, ""),
                     "unit": d.get("unit"), "stats": d, "prior": str(d.get("prior", "")),
                     "constrained": d.get("constrained"), "drawn": bool(d.get("drawn_from_prior"))})
    return rows


def _derived_description(name: str) -> str:
    return description(name)


def _derived_groups(s: dict) -> list[tuple[str, list[dict]]]:
    """The derived quantities in their report groups; names outside every group come last, as "Other"."""
    derived = s.get("derived") or {}
    seen = set()
    groups = []
    for title, names in DERIVED_GROUPS:
        present = [n for n in names if n in derived]
        seen.update(present)
        if present:
            groups.append((title, present))
    rest = [n for n in derived if n not in seen]
    if rest:
        groups.append(("Other", rest))
    return [(title, [{"name": n, "words": _derived_description(n), "unit": derived[n].get("unit"),
                      "stats": derived[n]} for n in names])
            for title, names in groups]


def _comparison(s: dict) -> dict | None:
    """The same star under each opacity law: laws (name, primary, warnings) and rows (label, unit, values)."""
    comp = s.get("comparison")
    if not isinstance(comp, dict) or not comp:
        return None
    laws = list(comp)
    wanted = (("parameters", "mass", "mass M"), ("derived", "diffusion_time", "photon diffusion time"),
              ("derived", "diffusion_time_radiative_core", "diffusion time, radiative zone"),
              ("derived", "kelvin_helmholtz_time", "Kelvin–Helmholtz time"),
              ("derived", "energy_transport_time", "energy-transport (thermal) time"),
              ("derived", "central_temperature", "central temperature"),
              ("derived", "mean_free_path_center", "mean free path at the centre"))
    rows = []
    for where, key, label in wanted:
        vals = [((comp[op] or {}).get(where) or {}).get(key) for op in laws]
        if not any(vals):
            continue
        unit = next((v.get("unit") for v in vals if v), "")
        rows.append((label, unit, vals))
    by_law = []
    for op in laws:
        c = comp[op] or {}
        notes = [str(w) for w in c.get("warnings") or []]
        if c.get("status") == "failed":  # a law that could not fit the star: its reason names it
            notes.append(str(c.get("reason") or "failed"))
        by_law.append({"name": str(op), "primary": op == s.get("opacity"), "warnings": notes})
    return {"laws": by_law, "rows": rows, "warned": any(law["warnings"] for law in by_law)}


def _star_figures(out_dir: Path, e: StarEntry) -> tuple[list[dict], list[str]]:
    """The star's plots that exist (src, title, caption) and the titles of those that do not."""
    s = e.summary or {}
    plots = s.get("plots") if isinstance(s.get("plots"), dict) else {}
    folder = (out_dir / "stars" / e.folder).resolve()
    kinds = [k for k in STAR_PLOTS if k != "opacity_comparison" or k in plots or s.get("comparison")]
    kinds += [k for k in plots if k not in STAR_PLOTS]
    figures, missing = [], []
    for kind in kinds:
        title, caption = STAR_PLOTS.get(kind, (str(kind).replace("_", " ").capitalize(), ""))
        name = plots.get(kind)
        path = (folder / str(name)).resolve() if isinstance(name, str) and name else None
        # only files inside the star's own folder; a missing one gets a note, never a broken image
        if path is None or path.parent != folder or not path.is_file():
            missing.append(title if name is None else f"{title} ({name})")
            continue
        figures.append({"src": _href("..", "stars", e.folder, path.name), "title": title, "caption": caption})
    return figures, missing


def _files(out_dir: Path, e: StarEntry) -> list[tuple[str, str, str]]:
    """(name, what it holds, link) of the star's files that exist."""
    folder = out_dir / "stars" / e.folder
    return [(name, what, _href("..", "stars", e.folder, name))
            for name, what in (("summary.json", "the star's record, every number on this page"),
                               ("chain.h5", "the full chain (HDF5: chain, log_prob)"))
            if (folder / name).is_file()]


# The numbers shown large at the top of a star page: (label, where in summary.json, name); each only where
# the star's model gives it (a polytrope has no age, lifetime, central X of its own or turnover time).
HEADLINE = (
    ("Mass", "parameters", "mass"),
    ("Age", "parameters", "age"),
    ("Main-sequence lifetime", "derived", "main_sequence_lifetime"),
    ("Central hydrogen X<sub>c</sub>", "derived", "central_hydrogen"),
    ("Photon diffusion time", "derived", "diffusion_time"),
    ("Energy-transport time U/L", "derived", "energy_transport_time"),
    ("Kelvin–Helmholtz time", "derived", "kelvin_helmholtz_time"),
    ("Convective core M<sub>cc</sub>/M", "derived", "convective_core_mass_fraction"),
    ("Envelope base r<sub>ce</sub>/R", "derived", "convective_envelope_base_radius"),
    ("Convective turnover time", "derived", "convective_turnover_time"),
)


def _headline(s: dict) -> list[tuple]:
    """(label as HTML, interval dict, unit) of the numbers shown large at the top of a star page."""
    items = []
    for label, where, name in HEADLINE:
        d = (s.get(where) or {}).get(name)
        if isinstance(d, dict) and _finite(d.get("p50")):
            items.append((Markup(label), d, d.get("unit") or ""))
    return items


def _quantiles(values) -> dict | None:
    """p16, p50, p84 of the finite values, as summary.json gives a quantity (None when none is finite)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if not v.size:
        return None
    p16, p50, p84 = np.percentile(v, (16.0, 50.0, 84.0))
    return {"p16": float(p16), "p50": float(p50), "p84": float(p84)}


def _time_ratio(out_dir: Path, e: StarEntry) -> dict | None:
    """The thermal over the photon diffusion time of a star: its posterior, or the ratio of the medians.

    The posterior of the ratio comes from chain.h5's derived samples (both times at the same rows); without
    them the percentiles in summary.json cannot give one, and only the ratio of the two medians is shown
    (``samples`` False).
    """
    derived = (e.summary or {}).get("derived") or {}
    th, diff = derived.get("energy_transport_time"), derived.get("diffusion_time")
    if not (isinstance(th, dict) and isinstance(diff, dict) and _finite(th.get("p50")) and _finite(diff.get("p50"))
            and diff["p50"] > 0 and th.get("unit") == diff.get("unit")):
        return None
    chain = out_dir / "stars" / e.folder / CHAIN_FILE
    if chain.is_file():
        try:
            import h5py

            with h5py.File(chain, "r") as f:
                g = f.get("derived")
                if g is not None and "energy_transport_time" in g and "diffusion_time" in g:
                    a, b = g["energy_transport_time"], g["diffusion_time"]
                    if a.attrs.get("unit") == b.attrs.get("unit"):
                        with np.errstate(divide="ignore", invalid="ignore"):
                            q = _quantiles(np.asarray(a) / np.asarray(b))
                        if q is not None:
                            return {**q, "samples": True}
        except (OSError, KeyError, ValueError):  # an unreadable chain only costs the interval
            pass
    return {"p50": th["p50"] / diff["p50"], "samples": False}


def star_page(out_dir: Path, e: StarEntry, prev: StarEntry | None, nxt: StarEntry | None) -> str:
    """A star's page as HTML (star.html.j2); a failed star shows its reason and observations only."""
    s = e.summary or {}
    context = {"star": e, "prev": prev, "following": nxt, "reason": str(s.get("reason") or ""),
               "observed": _observed_rows(s), "feh": _feh(s), "files": _files(out_dir, e),
               "model_errors": _model_errors(s)}
    if e.status != "failed":
        sampler = s.get("sampler") or {}
        steps, tau = sampler.get("steps"), sampler.get("tau_max")
        figures, missing = _star_figures(out_dir, e)
        undrawn = not isinstance(s.get("plots"), dict)
        context.update(
            warnings=[str(w) for w in s.get("warnings") or []], headline=_headline(s),
            parameters=_parameter_rows(s), unconstrained=unconstrained_sentence(s), fixed=s.get("fixed") or {},
            derived=_derived_groups(s), comparison=_comparison(s), sampler=sampler,
            steps_over_tau=steps / tau if _finite(steps) and _finite(tau) and tau else None,
            ppc_pvalue=s.get("ppc_pvalue"), poor_fit=e.poor_fit, ppc_poor=PPC_POOR,
            time_ratio=_time_ratio(out_dir, e),
            opacity=s.get("opacity", ""), stages=s.get("stages") or {}, seed=s.get("seed", ""),
            seconds=s.get("seconds"), figures=figures, missing=[] if undrawn else missing, undrawn=undrawn)
    return _render("star.html.j2", **context)


# ---------------------------------------------------------------- entry points


def _write(path: Path, text: str):
    write_text(path, text)
    os.chmod(path, 0o644)  # atomic writes start private (0600); a report is meant to be shared or served


def write_report(out_dir) -> Path:
    """Writes the HTML report of a run folder; returns the path of report/index.html.

    Parameters
    ----------
    out_dir : str or Path
        Output folder of a (finished or partial) catalog run.

    Returns
    -------
    Path
        ``out_dir/report/index.html``.

    Raises
    ------
    ConfigError
        When ``out_dir`` is not a run folder.
    """
    out_dir = check_run_folder(out_dir)
    report_dir = out_dir / "report"
    report_dir.mkdir(parents=True, exist_ok=True)
    entries = load_stars(out_dir)
    with_page = [e for e in entries if e.page]
    for i, e in enumerate(with_page):
        prev = with_page[i - 1] if i > 0 else None
        nxt = with_page[i + 1] if i + 1 < len(with_page) else None
        _write(report_dir / e.page, star_page(out_dir, e, prev, nxt))
    index = report_dir / "index.html"
    _write(index, catalog_page(out_dir, report_dir, entries))
    return index
