"""`radwalk report DIR`: a static HTML report built from the files of a run folder.

The report is read from what a run leaves on disk (``stars/*/summary.json``,
``run.toml``, ``summary.ecsv`` and the PNGs), so it can be rebuilt for a
finished or a partial run.  It opens from the file system with no server and
no network: no external CSS, scripts or fonts, relative links only.  Every
piece of text that comes from the catalog or the files is HTML-escaped, and a
Content-Security-Policy lets only the report's own inline script run, so an
id such as ``<script>...</script>`` is shown as text and can never execute.

Layout written::

    DIR/report/index.html          catalog page
    DIR/report/<safe-id>.html      one page per star (safe id = its folder under stars/)
    DIR/report/hr_diagram.png      catalog plots (radwalk.report.figures.write_catalog_plots)
    DIR/report/timescales_vs_mass.png
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
from html import escape
from pathlib import Path
from urllib.parse import quote

from radwalk import __version__
from radwalk.errors import ConfigError
from radwalk.inference.fit import PPC_POOR
from radwalk.inference.star import safe_folder_name
from radwalk.model.quantities import DERIVED_GROUPS, OBS_SHORT, PARAM_SYMBOL, PARAM_WORDS, UNIT_HTML, description
from radwalk.results.files import write_text

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

STATUSES = ("ok", "not-converged", "failed", "pending", "unreadable")
STATUS_TEXT = {
    "ok": "ok", "not-converged": "not converged", "failed": "failed",
    "pending": "not finished", "unreadable": "unreadable",
}

# Star plots in page order: kind -> (title, caption); file names come from summary.json's `plots`.
STAR_PLOTS = {
    "corner_parameters": ("Posterior of the sampled parameters",
                          "One- and two-dimensional marginals of the parameters the sampler explored."),
    "corner_timescales": ("Posterior of the timescales",
                          "Photon diffusion, Kelvin–Helmholtz and dynamical times and their correlations."),
    "trace": ("Trace of the walkers", "Every walker's position against step; the burn-in is discarded."),
    "profile": ("Interior profiles", "Posterior bands (68 % and 95 %) of the radial structure."),
    "predictive": ("Posterior-predictive check",
                   "Observed R, L, T_eff against the values the posterior predicts."),
    "opacity_comparison": ("Opacity laws compared", "The same star fitted under each opacity law."),
}
CATALOG_PLOTS = {
    "hr_diagram": ("Hertzsprung–Russell diagram",
                   "Observed stars with error bars and the posterior-predictive positions.", "hr_diagram.png"),
    "timescales_vs_mass": ("Timescales against mass",
                           "Photon diffusion time and Kelvin–Helmholtz time with 68 % credible intervals.",
                           "timescales_vs_mass.png"),
}

OBSERVABLE_ROWS = (("radius", "Radius R", "R_sun"), ("luminosity", "Luminosity L", "L_sun"),
                   ("teff", "Effective temperature T<sub>eff</sub>", "K"))

# Catalog table columns: (header html, unit, where, name, sort key)
CATALOG_COLUMNS = (
    ("M", "M_sun", "parameters", "mass"),
    ("R", "R_sun", "derived", "radius"),
    ("L", "L_sun", "derived", "luminosity"),
    ("T<sub>eff</sub>", "K", "derived", "teff"),
    ("t<sub>diff</sub>", "yr", "derived", "diffusion_time"),
    ("t<sub>KH</sub>", "yr", "derived", "kelvin_helmholtz_time"),
)

# Sorts the catalog table by a clicked header; without JS the table stays in catalog order.
SORT_JS = """document.documentElement.classList.add("js");
Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), function (t) {
  var heads = t.tHead.rows[0].cells;
  Array.prototype.forEach.call(heads, function (th, col) {
    var kind = th.getAttribute("data-sort");
    if (!kind) return;
    th.tabIndex = 0;
    function key(row) {
      var c = row.cells[col], v = c.getAttribute("data-v");
      return v === null ? c.textContent.trim() : v;
    }
    function go() {
      var asc = th.getAttribute("aria-sort") !== "ascending";
      Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
      var body = t.tBodies[0], rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = key(a), y = key(b);
        if (kind === "num") {
          var fx = parseFloat(x), fy = parseFloat(y), nx = isNaN(fx), ny = isNaN(fy);
          if (nx || ny) return nx - ny;
          return asc ? fx - fy : fy - fx;
        }
        return asc ? x.localeCompare(y) : y.localeCompare(x);
      });
      rows.forEach(function (r) { body.appendChild(r); });
    }
    th.addEventListener("click", go);
    th.addEventListener("keydown", function (e) {
      if (e.key === "Enter" || e.key === " ") { e.preventDefault(); go(); }
    });
  });
});
"""

CSS = """
:root { --fg: #1d2330; --muted: #667085; --line: #d9dee7; --soft: #f4f6fa; --accent: #2f5d9e;
  --ok: #1e7b45; --ok-bg: #e3f4ea; --nc: #8a5a00; --nc-bg: #fdf1d6; --bad: #b42318; --bad-bg: #fde7e5;
  --pend: #475467; --pend-bg: #eaecf0; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--fg); background: #fff;
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", "DejaVu Sans", Roboto, Helvetica, Arial, sans-serif; }
main { max-width: 1240px; margin: 0 auto; padding: 1.2rem 1.6rem 3rem; }
header.top { background: #16243d; color: #fff; }
header.top div { max-width: 1240px; margin: 0 auto; padding: .7rem 1.6rem; display: flex; gap: 1.2rem;
  align-items: baseline; flex-wrap: wrap; }
header.top a { color: #cfe0ff; text-decoration: none; }
header.top a:hover { text-decoration: underline; }
header.top .brand { font-weight: 700; letter-spacing: .02em; color: #fff; }
h1 { font-size: 1.6rem; margin: .6rem 0 .4rem; overflow-wrap: anywhere; }
h2 { font-size: 1.2rem; margin: 2rem 0 .6rem; padding-bottom: .2rem; border-bottom: 1px solid var(--line); }
h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; color: #344054; }
a { color: var(--accent); }
p.note, .muted { color: var(--muted); }
p.note { font-size: .92rem; }
code, pre { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: .88rem; }
pre { background: var(--soft); padding: .8rem; overflow-x: auto; border-radius: 4px; }
.badge { display: inline-block; padding: .05rem .55rem; border-radius: 999px; font-size: .85rem;
  font-weight: 600; white-space: nowrap; vertical-align: middle; }
.st-ok { color: var(--ok); background: var(--ok-bg); }
.st-not-converged { color: var(--nc); background: var(--nc-bg); }
.st-failed, .st-unreadable { color: var(--bad); background: var(--bad-bg); }
.st-pending { color: var(--pend); background: var(--pend-bg); }
.counts { display: flex; gap: .6rem; flex-wrap: wrap; margin: .6rem 0; }
.counts .badge { font-size: .95rem; padding: .25rem .8rem; }
.meta { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1.2rem; margin: .4rem 0;
  font-size: .95rem; }
.meta dt { color: var(--muted); }
.meta dd { margin: 0; overflow-wrap: anywhere; }
table { border-collapse: collapse; font-variant-numeric: tabular-nums; margin: .3rem 0 .8rem; }
th, td { padding: .3rem .65rem; border-bottom: 1px solid var(--line); text-align: left; vertical-align: top; }
thead th { background: var(--soft); font-weight: 600; border-bottom: 2px solid #c4cad6; white-space: nowrap;
  position: sticky; top: 0; z-index: 1; }
tbody tr:hover { background: #f7f9fd; }
tbody th.group { background: #fafbfd; font-size: .8rem; color: var(--muted); text-transform: uppercase;
  letter-spacing: .04em; padding-top: .6rem; }
td.num, th.num { text-align: right; white-space: nowrap; }
td.reason { min-width: 13rem; max-width: 30rem; overflow-wrap: anywhere; font-size: .84rem; line-height: 1.35;
  color: #475467; }
td.pname, td.u, td.verdict { white-space: nowrap; }
td.prior { white-space: nowrap; font-size: .9rem; }
td.id { min-width: 8rem; max-width: 14rem; }
td.id a { font-weight: 600; overflow-wrap: break-word; }
#stars th, #stars td { padding-left: .45rem; padding-right: .45rem; }
.unit { font-weight: 400; color: var(--muted); font-size: .85em; }
.wide { width: 100%; }
.scroll { overflow-x: auto; }
tr.row-ok td:first-child { box-shadow: inset 4px 0 var(--ok); }
tr.row-not-converged td:first-child { box-shadow: inset 4px 0 #d99a00; }
tr.row-failed td:first-child, tr.row-unreadable td:first-child { box-shadow: inset 4px 0 var(--bad); }
tr.row-pending td:first-child { box-shadow: inset 4px 0 #98a2b3; }
.pm { display: inline-flex; flex-direction: column; vertical-align: middle; font-size: .72em;
  line-height: 1.05; margin-left: .12em; text-align: left; }
.pm sup, .pm sub { vertical-align: baseline; position: static; }
th[data-sort] { cursor: default; }
html.js th[data-sort] { cursor: pointer; }
html.js th[data-sort]:hover { background: #e6ebf3; }
th[aria-sort=ascending]::after { content: " ▲"; font-size: .7em; }
th[aria-sort=descending]::after { content: " ▼"; font-size: .7em; }
.js-only { display: none; }
html.js .js-only { display: inline; }
.box { border-radius: 6px; padding: .7rem 1rem; margin: .8rem 0; }
.box.warn { background: #fff6e0; border: 1px solid #f0c36d; border-left: 5px solid #e0a100; }
.box.warn h2 { margin: 0 0 .3rem; border: 0; font-size: 1.05rem; color: #7a4d00; }
.box.warn ul { margin: .2rem 0; padding-left: 1.2rem; }
.box.fail { background: var(--bad-bg); border: 1px solid #f5b5ae; border-left: 5px solid var(--bad); }
.box.info { background: var(--soft); border: 1px solid var(--line); }
.headline { display: flex; gap: 1.8rem; flex-wrap: wrap; margin: .6rem 0 .2rem; }
.headline div { background: var(--soft); border: 1px solid var(--line); border-radius: 6px; padding: .45rem .9rem; }
.headline .k { display: block; color: var(--muted); font-size: .8rem; }
.headline .v { font-size: 1.15rem; font-weight: 600; }
.figs { display: grid; grid-template-columns: repeat(auto-fit, minmax(460px, 1fr)); gap: 1.2rem; }
figure { margin: 0; border: 1px solid var(--line); border-radius: 6px; padding: .6rem; background: #fff; }
figure img { width: 100%; height: auto; display: block; }
.figs.one { grid-template-columns: minmax(0, 1fr); max-width: 1060px; }
.figs.one img { width: auto; max-width: 100%; margin: 0 auto; }
figcaption { font-size: .88rem; color: #475467; margin-top: .4rem; }
figcaption b { color: var(--fg); }
.yes { color: var(--ok); font-weight: 600; }
.no { color: var(--nc); font-weight: 600; }
nav.pager { display: flex; gap: 1rem; flex-wrap: wrap; font-size: .92rem; margin-top: .4rem; }
footer { margin-top: 3rem; font-size: .82rem; color: var(--muted); border-top: 1px solid var(--line);
  padding-top: .6rem; }
@media print { header.top { display: none; } thead th { position: static; } }
"""


@dataclass
class StarEntry:
    """One star as found in the run folder."""

    id: str
    folder: str  # name of its folder under stars/
    status: str  # ok, not-converged, failed, pending (no summary.json yet), unreadable
    summary: dict | None
    problem: str = ""  # why a pending / unreadable star has no summary

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
    # json accepts NaN and Infinity, which summary.json uses for missing values
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
    return [(sid, folder if folder and "/" not in folder and folder not in (".", "..") else safe_folder_name(sid))
            for sid, folder in zip(ids, folders)]


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


# ---------------------------------------------------------------- formatting


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


def num(x, digits: int = 4) -> str:
    """A number as HTML (a dash when missing)."""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if not _finite(x):
        return '<span class="muted">–</span>'
    e = _exponent(x)
    m = x / 10.0**e
    if e:
        text = f"{m:.{max(digits - 1, 1)}g}"
    elif abs(m) >= 1000:
        text = f"{m:.0f}"
    else:
        text = f"{m:.{digits}g}"
    return text.replace("-", "−") + _times_ten(e)


def interval(d: dict | None) -> str:
    """Median with the 16th and 84th percentiles as -/+ offsets, as HTML."""
    if not d:
        return '<span class="muted">–</span>'
    p16, p50, p84 = d.get("p16"), d.get("p50"), d.get("p84")
    if not _finite(p50):
        return '<span class="muted">–</span>'
    if not (_finite(p16) and _finite(p84)):
        return num(p50)
    # the median sets the power of ten unless it is tiny beside the upper end (a posterior piled at 0)
    top = max(abs(p16), abs(p50), abs(p84))
    e = _exponent(p50 if abs(p50) * 100 >= top else top)
    s = 10.0**e
    m, lo, hi = p50 / s, (p50 - p16) / s, (p84 - p50) / s
    errs = [v for v in (lo, hi) if v > 0]
    if not errs:
        return num(p50)
    # two significant digits of the smaller error, but never more than two beyond the larger one's
    need_small = 1 - math.floor(math.log10(min(errs)))
    need_large = 1 - math.floor(math.log10(max(errs)))
    digits = min(need_small, need_large + 2)
    if digits < 0:  # round big numbers to the error's digits rather than print noise
        step = 10.0 ** (-digits)
        m, lo, hi = (round(v / step) * step for v in (m, lo, hi))
        digits = 0
    digits = min(digits, 6)
    body = (f"{m:.{digits}f}".replace("-", "−")
            + f'<span class="pm"><sup>+{hi:.{digits}f}</sup><sub>−{lo:.{digits}f}</sub></span>')
    return body + _times_ten(e)


def unit_html(unit: str | None) -> str:
    if not unit:
        return ""
    return UNIT_HTML.get(unit, escape(unit))


def _sort_value(x) -> str:
    return repr(float(x)) if _finite(x) else ""


def _badge(status: str) -> str:
    return f'<span class="badge st-{escape(status)}">{escape(STATUS_TEXT.get(status, status))}</span>'


def _href(*parts: str) -> str:
    """A relative URL from path parts (each part percent-encoded), escaped for an attribute."""
    return escape("/".join(quote(p, safe="") if p not in ("..", ".") else p for p in parts), quote=True)


def _script_hash(js: str) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(js.encode("utf-8")).digest()).decode("ascii")


def _page(title: str, body: str, script: str = "", nav: str = "") -> str:
    # Only the report's own script (by its hash) may run; images only from the file system.
    script_src = f"'{_script_hash(script)}'" if script else "'none'"
    csp = (f"default-src 'none'; img-src 'self' file:; style-src 'unsafe-inline'; "
           f"script-src {script_src}; base-uri 'none'; form-action 'none'")
    tail = f"<script>{script}</script>\n" if script else ""
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f"<meta http-equiv=\"Content-Security-Policy\" content=\"{csp}\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>{escape(title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n"
        f"<header class=\"top\"><div><span class=\"brand\">radwalk report</span>{nav}</div></header>\n"
        f"<main>\n{body}\n<footer>Made by radwalk {escape(__version__)} from the files of this run folder; "
        "it opens from the file system with no server or network.</footer>\n</main>\n"
        f"{tail}</body>\n</html>\n"
    )


# ---------------------------------------------------------------- catalog page


PROVENANCE_NOT_VERSIONS = ("seed", "catalog", "catalog_sha256", "config_sha256", "plugins", "plugin_sha256",
                           "executor", "workers", "first_started", "started", "finished")
CONFIG_SECTIONS = ("stages", "settings", "priors", "sampler", "metallicity", "columns", "run")


def _table(d) -> dict:
    return d if isinstance(d, dict) else {}


def _run_meta_html(out_dir: Path, run: dict, run_text: str, problem: str, entries) -> str:
    prov = _table(run.get("provenance"))
    runsec = _table(run.get("run"))
    rows = [("Run folder", f"<code>{escape(str(out_dir.resolve()))}</code>")]
    if prov.get("catalog"):
        sha = str(prov.get("catalog_sha256", ""))[:12]
        rows.append(("Catalog", f"<code>{escape(str(prov['catalog']))}</code>"
                     + (f' <span class="muted">sha256 {escape(sha)}…</span>' if sha else "")))
    stages = _table(run.get("stages"))
    if stages:
        rows.append(("Stages", ", ".join(
            f"{escape(str(k))} <code>{escape(', '.join(map(str, v)) if isinstance(v, list) else str(v))}</code>"
            for k, v in stages.items())))
    else:
        rows.append(("Stages", "the defaults (none named in run.toml)" if run else num(None)))
    settings = _table(run.get("settings"))
    if settings:
        rows.append(("Settings", ", ".join(f"<code>{escape(str(k))} = {escape(str(v))}</code>"
                                           for k, v in settings.items())))
    priors = _table(run.get("priors"))
    if priors:
        rows.append(("Priors changed", ", ".join(
            f"{escape(str(k))}: {escape(', '.join(f'{a} {b}' for a, b in _table(v).items()))}"
            for k, v in priors.items())))
    seed = runsec.get("seed", prov.get("seed"))
    if seed is not None:
        rows.append(("Seed", escape(str(seed))))
    plugins = list(runsec.get("plugins") or prov.get("plugins") or [])
    if plugins:
        rows.append(("Plugins", ", ".join(f"<code>{escape(str(x))}</code>" for x in plugins)))
    sampler = _table(run.get("sampler"))
    if sampler:
        rows.append(("Sampler", escape(", ".join(f"{k} = {v}" for k, v in sampler.items()))))
    if prov.get("executor"):
        workers = prov.get("workers")
        rows.append(("Executor", escape(str(prov["executor"]))
                     + (f", {escape(str(workers))} worker(s)" if workers not in (None, "") else "")))
    if prov.get("started") or prov.get("finished"):
        when = f"{escape(str(prov.get('started', '?')))} to {escape(str(prov.get('finished', '?')))}"
        first = prov.get("first_started")
        if first and first != prov.get("started"):
            when += f' <span class="muted">(resumed; first started {escape(str(first))})</span>'
        rows.append(("Ran", when))
    versions = {k: v for k, v in prov.items() if k not in PROVENANCE_NOT_VERSIONS and not isinstance(v, dict)}
    if not versions:
        found = sorted({str(e.summary.get("radwalk_version")) for e in entries
                        if e.summary and e.summary.get("radwalk_version") is not None})
        if found:
            versions = {"radwalk": ", ".join(found)}
    if versions:
        rows.append(("Versions", escape(", ".join(f"{k} {v}" for k, v in versions.items()))))
    for key, value in run.items():  # any other table a later radwalk adds, shown as it is
        if key in CONFIG_SECTIONS or key == "provenance":
            continue
        text = ", ".join(f"{k} = {v}" for k, v in value.items()) if isinstance(value, dict) else str(value)
        rows.append((escape(str(key).replace("_", " ").capitalize()), escape(text)))
    html = '<dl class="meta">' + "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows) + "</dl>"
    if problem:
        html += f'<p class="note">{escape(problem)}.</p>'
    if run_text:
        html += ("<details><summary>Full run configuration (run.toml)</summary>"
                 f"<pre>{escape(run_text)}</pre></details>")
    return html


def _counts_html(entries) -> str:
    counts = {s: sum(e.status == s for e in entries) for s in STATUSES}
    chips = [f'<span class="badge st-pending">{len(entries)} stars</span>']
    chips += [f'<span class="badge st-{s}">{counts[s]} {escape(STATUS_TEXT[s])}</span>'
              for s in STATUSES if counts[s] or s in ("ok", "not-converged", "failed")]
    return '<div class="counts">' + "".join(chips) + "</div>"


def _catalog_plots_html(out_dir: Path, report_dir: Path, entries) -> str:
    summaries = [e.summary for e in entries if e.summary is not None]
    made: dict = {}
    note = ""
    try:
        from radwalk.report.figures import write_catalog_plots
    except ImportError as exc:
        note = f"Catalog plots are not available: the plotting module could not be loaded ({exc})."
    else:
        try:
            made = dict(write_catalog_plots(summaries, report_dir) or {})
        except Exception as exc:  # noqa: BLE001 - a failed plot must not cost the whole report
            note = f"Catalog plots could not be drawn: {type(exc).__name__}: {exc}"
    figs = []
    kinds = list(CATALOG_PLOTS) + [k for k in made if k not in CATALOG_PLOTS]
    for kind in kinds:
        title, caption, default = CATALOG_PLOTS.get(kind, (kind.replace("_", " ").capitalize(), "", ""))
        name = str(made.get(kind, default))
        path = report_dir / name
        if name and path.is_file() and path.resolve().parent == report_dir.resolve():
            figs.append(f'<figure><a href="{_href(name)}"><img src="{_href(name)}" alt="{escape(title)}">'
                        f'</a><figcaption><b>{escape(title)}.</b> {escape(caption)}</figcaption>'
                        "</figure>")
        elif not note:
            figs.append(f'<p class="note">{escape(title)}: no image was written.</p>')
    html = '<div class="figs">' + "".join(figs) + "</div>" if figs else ""
    if note:
        html += f'<p class="note">{escape(note)}</p>'
    return html


def _catalog_table(entries) -> str:
    head = ['<th class="num" data-sort="num">#</th>', '<th data-sort="text">Star</th>',
            '<th data-sort="text">Status</th>']
    for label, unit, _, _ in CATALOG_COLUMNS:
        head.append(f'<th class="num" data-sort="num">{label} <span class="unit">[{unit_html(unit)}]</span></th>')
    head += ['<th class="num" data-sort="num">Warnings</th>', '<th data-sort="text">Reason</th>']
    rows = []
    for i, e in enumerate(entries, 1):
        s = e.summary or {}
        name = escape(e.id)
        cell_id = f'<a href="{_href(e.page)}">{name}</a>' if e.page else name
        cells = [f'<td class="num" data-v="{i}">{i}</td>', f'<td class="id">{cell_id}</td>',
                 f'<td data-v="{escape(e.status)}">{_badge(e.status)}</td>']
        for _, _, where, key in CATALOG_COLUMNS:
            d = (s.get(where) or {}).get(key) if e.status != "failed" else None
            cells.append(f'<td class="num" data-v="{_sort_value((d or {}).get("p50"))}">{interval(d)}</td>')
        warn = s.get("warnings") or []
        nwarn = len(warn) if e.summary and e.status != "failed" else None
        cells.append(f'<td class="num" data-v="{"" if nwarn is None else nwarn}">'
                     f'{"" if nwarn is None else nwarn}</td>')
        reason = s.get("reason") or e.problem
        cells.append(f'<td class="reason">{escape(str(reason))}</td>')
        rows.append(f'<tr class="row-{escape(e.status)}">' + "".join(cells) + "</tr>")
    if not rows:
        rows.append(f'<tr><td colspan="{len(head)}" class="muted">No star has been run yet.</td></tr>')
    return ('<div class="scroll"><table class="sortable wide" id="stars">\n<thead><tr>' + "".join(head)
            + "</tr></thead>\n<tbody>\n" + "\n".join(rows) + "\n</tbody></table></div>")


def catalog_page(out_dir: Path, report_dir: Path, entries) -> str:
    run, run_text, problem = read_run_toml(out_dir)
    body = [
        f"<h1>Catalog run <code>{escape(out_dir.resolve().name)}</code></h1>",
        _counts_html(entries),
        '<nav class="pager"><a href="#run">Run</a> <a href="#plots">Catalog plots</a> '
        '<a href="#table">Table of stars</a></nav>',
        '<h2 id="run">Run</h2>', _run_meta_html(out_dir, run, run_text, problem, entries),
        '<h2 id="plots">Catalog plots</h2>', _catalog_plots_html(out_dir, report_dir, entries),
        '<h2 id="table">Stars</h2>',
        '<p class="note">Medians with the 16th and 84th percentiles of the posterior; R, L and T<sub>eff</sub> '
        "are the model's, t<sub>diff</sub> is the photon diffusion time from centre to surface and "
        "t<sub>KH</sub> the Kelvin–Helmholtz time. Rows are in catalog order"
        '<span class="js-only">; click a column header to sort (# restores the catalog order)</span>.</p>',
        _catalog_table(entries),
    ]
    return _page("radwalk report: " + out_dir.resolve().name, "\n".join(body), SORT_JS)


# ---------------------------------------------------------------- star pages


def _table_html(head: str, rows: list[str]) -> str:
    """A table (head: one <tr>) that scrolls sideways on a narrow window instead of overflowing."""
    return f"<div class=\"scroll\"><table><thead>{head}</thead><tbody>{''.join(rows)}</tbody></table></div>"


def _observed_table(s: dict, full: bool) -> str:
    obs = s.get("observed") or {}
    derived = s.get("derived") or {}
    head = "<tr><th>Observable</th><th>Unit</th><th class=\"num\">Observed</th>"
    if full:
        head += ('<th class="num">Model (posterior)</th><th class="num">MAP model</th>'
                 '<th class="num">Model − observed</th>')
    rows = []
    for key, label, unit in OBSERVABLE_ROWS:
        o = obs.get(key) or {}
        v, err = o.get("value"), o.get("error")
        shown = f"{num(v)} ± {num(err)}" if _finite(v) else '<span class="muted">not measured</span>'
        row = f"<tr><td>{label}</td><td class=\"u\">{unit_html(unit)}</td><td class=\"num\">{shown}</td>"
        if full:
            d = derived.get(key) or {}
            resid = ""
            if _finite(v) and _finite(err) and err > 0 and _finite(d.get("p50")):
                z = (d["p50"] - v) / err
                resid = f"{z:+.2f} σ".replace("-", "−")
                if abs(z) > 2:  # beyond 2 sigma deserves the eye
                    resid = f'<span class="no">{resid}</span>'
            row += (f'<td class="num">{interval(d)}</td><td class="num">{num(d.get("map"))}</td>'
                    f'<td class="num">{resid}</td>')
        rows.append(row + "</tr>")
    feh = s.get("feh")
    if isinstance(feh, (list, tuple)) and len(feh) == 2:
        extra = '<td></td><td></td><td></td>' if full else ""
        rows.append(f"<tr><td>[Fe/H] (prior on Z)</td><td>dex</td><td class=\"num\">{num(feh[0])} ± {num(feh[1])}"
                    f"</td>{extra}</tr>")
    return _table_html(head + "</tr>", rows)


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


def _parameters_table(s: dict) -> str:
    params = s.get("parameters") or {}
    head = ("<tr><th>Parameter</th><th class=\"num\">p16</th><th class=\"num\">p50</th>"
            "<th class=\"num\">p84</th><th class=\"num\">MAP</th><th>Prior</th><th class=\"num\">τ</th>"
            "<th class=\"num\">ESS</th><th class=\"num\" title=\"posterior standard deviation over prior width\">"
            "σ / prior</th><th>Constrained?</th></tr>")
    rows = []
    for name, d in params.items():
        c = d.get("constrained")
        verdict = ('<span class="yes">yes</span>' if c else '<span class="no">no</span> (prior-dominated)'
                   if c is not None else "")
        if d.get("drawn_from_prior"):
            verdict = '<span class="no">no</span> (drawn from its prior)'
        label = escape(PARAM_WORDS.get(name, ""))
        unit = f" [{unit_html(d.get('unit'))}]" if d.get("unit") else ""
        rows.append(
            f"<tr><td class=\"pname\"><b>{escape(PARAM_SYMBOL.get(name, name))}</b>{unit} "
            f"<span class=\"muted\">{label}</span></td>"
            + "".join(f'<td class="num">{num(d.get(k))}</td>' for k in ("p16", "p50", "p84", "map"))
            + f"<td class=\"prior\">{escape(str(d.get('prior', '')))}</td>"
            + f'<td class="num">{num(d.get("tau"), 3)}</td><td class="num">{num(d.get("ess"), 3)}</td>'
            + f'<td class="num">{num(d.get("posterior_over_prior_width"), 2)}</td>'
            + f'<td class="verdict">{verdict}</td></tr>')
    html = _table_html(head, rows)
    sentence = unconstrained_sentence(s)
    if sentence:
        html += f'<p class="box info">{escape(sentence)}</p>'
    html += ('<p class="note">A parameter counts as constrained when its posterior standard deviation is '
             "under half the width of its prior (σ / prior). τ is the integrated autocorrelation time in steps, "
             "ESS the effective number of independent samples, MAP the maximum a posteriori point.</p>")
    fixed = s.get("fixed") or {}
    if fixed:
        html += ('<p class="note">Held fixed: ' + ", ".join(
            f"<code>{escape(str(k))} = {num(v)}</code>" for k, v in fixed.items()) + ".</p>")
    return html


def _derived_description(name: str) -> str:
    return description(name)


def _derived_table(s: dict) -> str:
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
    head = ("<tr><th>Quantity</th><th>Unit</th><th class=\"num\">Median and 68 % interval</th>"
            "<th class=\"num\">p16</th><th class=\"num\">p84</th><th class=\"num\">MAP</th></tr>")
    rows = []
    for title, names in groups:
        rows.append(f'<tr><th colspan="6" class="group">{escape(title)}</th></tr>')
        for n in names:
            d = derived[n]
            rows.append(f"<tr><td>{escape(_derived_description(n))} <code class=\"muted\">{escape(n)}</code></td>"
                        f"<td class=\"u\">{unit_html(d.get('unit'))}</td><td class=\"num\">{interval(d)}</td>"
                        f'<td class="num">{num(d.get("p16"))}</td><td class="num">{num(d.get("p84"))}</td>'
                        f'<td class="num">{num(d.get("map"))}</td></tr>')
    return _table_html(head, rows)


def _sampler_html(s: dict) -> str:
    sm = s.get("sampler") or {}
    conv = sm.get("converged")
    steps, tau = sm.get("steps"), sm.get("tau_max")
    rows = [
        ("Walkers", num(sm.get("walkers"))), ("Steps", num(sm.get("steps"))),
        ("Burn-in discarded", f"{num(sm.get('burn'))} steps"), ("Thinning", f"every {num(sm.get('thin'))} steps"),
        ("Samples kept", num(sm.get("samples"))),
        ("Samples for derived quantities", num(sm.get("derived_samples"))),
        ("Acceptance fraction", num(sm.get("acceptance"), 3)),
        ("Largest autocorrelation time τ<sub>max</sub>", f"{num(tau, 3)} steps"),
        ("Chain length / τ<sub>max</sub>", num(steps / tau if _finite(steps) and _finite(tau) and tau else None, 3)),
        ("Converged", ('<span class="yes">yes</span>' if conv else '<span class="no">no</span>')
         if conv is not None else num(None)),
        ("Stopping reason", escape(str(sm.get("reason", "")))),
        ("Posterior-predictive p-value", _pvalue(s.get("ppc_pvalue"))
         + ' <span class="muted">(chance that replicated data fit worse than the observed; '
           "very small values flag a poor fit)</span>"),
        ("Best log-probability", num(sm.get("map_log_prob"))),
        ("Opacity law", f"<code>{escape(str(s.get('opacity', '')))}</code>"),
        ("Stages", ", ".join(f"{escape(str(k))} <code>{escape(str(v))}</code>"
                             for k, v in (s.get("stages") or {}).items())),
        ("Seed", escape(str(s.get("seed", "")))),
        ("Run time", f"{num(s.get('seconds'), 3)} s"),
    ]
    return '<dl class="meta">' + "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows) + "</dl>"


def _pvalue(p) -> str:
    text = num(p, 3)
    if _finite(p) and p < PPC_POOR:
        return f'<span class="no">{text}</span>'
    return text


def _comparison_html(s: dict) -> str:
    comp = s.get("comparison")
    if not isinstance(comp, dict) or not comp:
        return ""
    laws = list(comp)
    head = "<tr><th>Quantity</th><th>Unit</th>" + "".join(
        f'<th class="num"><code>{escape(str(op))}</code>{" (primary)" if op == s.get("opacity") else ""}</th>'
        for op in laws) + "</tr>"
    wanted = (("parameters", "mass", "mass M"), ("derived", "diffusion_time", "photon diffusion time"),
              ("derived", "diffusion_time_radiative", "diffusion time, radiative layers"),
              ("derived", "kelvin_helmholtz_time", "Kelvin–Helmholtz time"),
              ("derived", "central_temperature", "central temperature"),
              ("derived", "mean_free_path_center", "mean free path at the centre"))
    rows = []
    for where, key, label in wanted:
        vals = [((comp[op] or {}).get(where) or {}).get(key) for op in laws]
        if not any(vals):
            continue
        unit = next((v.get("unit") for v in vals if v), "")
        rows.append(f"<tr><td>{escape(label)}</td><td class=\"u\">{unit_html(unit)}</td>"
                    + "".join(f'<td class="num">{interval(v)}</td>' for v in vals) + "</tr>")
    rows.append("<tr><td>warnings</td><td></td>" + "".join(
        f'<td class="num">{len((comp[op] or {}).get("warnings") or [])}</td>' for op in laws) + "</tr>")
    html = "<h2>Opacity laws compared</h2>" + _table_html(head, rows)
    per_law = [(op, (comp[op] or {}).get("warnings") or []) for op in laws]
    items = "".join(f"<li><code>{escape(str(op))}</code>: {escape(str(w))}</li>" for op, ws in per_law for w in ws)
    if items:
        html += f'<details><summary>Warnings under each law</summary><ul>{items}</ul></details>'
    return html


def _star_figures(out_dir: Path, e: StarEntry) -> str:
    s = e.summary or {}
    plots = s.get("plots") if isinstance(s.get("plots"), dict) else {}
    folder = (out_dir / "stars" / e.folder).resolve()
    kinds = [k for k in STAR_PLOTS if k != "opacity_comparison" or k in plots or s.get("comparison")]
    kinds += [k for k in plots if k not in STAR_PLOTS]
    figs, missing = [], []
    for kind in kinds:
        title, caption = STAR_PLOTS.get(kind, (str(kind).replace("_", " ").capitalize(), ""))
        name = plots.get(kind)
        path = (folder / str(name)).resolve() if isinstance(name, str) and name else None
        # only files inside the star's own folder; a missing one gets a note, never a broken image
        if path is None or path.parent != folder or not path.is_file():
            missing.append(title if name is None else f"{title} ({name})")
            continue
        src = _href("..", "stars", e.folder, path.name)
        figs.append(f'<figure><a href="{src}"><img src="{src}" alt="{escape(title)}"></a>'
                    f"<figcaption><b>{escape(title)}.</b> {escape(caption)}</figcaption></figure>")
    html = '<div class="figs one">' + "".join(figs) + "</div>" if figs else ""
    if missing:
        html += ('<p class="note">Not available (no image was written): '
                 + "; ".join(escape(m) for m in missing) + ".</p>")
    return html


def _files_html(out_dir: Path, e: StarEntry) -> str:
    folder = out_dir / "stars" / e.folder
    links = []
    for name, what in (("summary.json", "the star's record, every number on this page"),
                       ("chain.h5", "the full chain (HDF5: chain, log_prob)")):
        if (folder / name).is_file():
            links.append(f'<li><a href="{_href("..", "stars", e.folder, name)}">{name}</a> '
                         f'<span class="muted">{escape(what)}</span></li>')
    return f"<h2>Files</h2><ul>{''.join(links)}</ul>" if links else ""


def _headline(s: dict) -> str:
    items = [("Mass", (s.get("parameters") or {}).get("mass"), "M_sun"),
             ("Photon diffusion time", (s.get("derived") or {}).get("diffusion_time"), "yr"),
             ("Kelvin–Helmholtz time", (s.get("derived") or {}).get("kelvin_helmholtz_time"), "yr")]
    parts = [f'<div><span class="k">{k}</span><span class="v">{interval(d)} {unit_html(u)}</span></div>'
             for k, d, u in items if d]
    return '<div class="headline">' + "".join(parts) + "</div>" if parts else ""


def star_page(out_dir: Path, e: StarEntry, prev: StarEntry | None, nxt: StarEntry | None) -> str:
    s = e.summary or {}
    pager = ['<a href="index.html">← catalog</a>']
    if prev is not None:
        pager.append(f'<a href="{_href(prev.page)}">‹ previous: {escape(prev.id)}</a>')
    if nxt is not None:
        pager.append(f'<a href="{_href(nxt.page)}">next: {escape(nxt.id)} ›</a>')
    body = [f'<nav class="pager">{" ".join(pager)}</nav>',
            f"<h1>{escape(e.id)} {_badge(e.status)}</h1>"]
    reason = str(s.get("reason") or "")
    if e.status == "failed":
        body.append(f'<div class="box fail"><b>This star could not be fitted.</b> {escape(reason)}</div>')
        body += ["<h2>Observations</h2>", _observed_table(s, full=False), _files_html(out_dir, e)]
        return _page(f"{e.id}: failed", "\n".join(body), nav='<a href="index.html">catalog</a>')
    if reason:
        body.append(f'<p><b>Status:</b> {escape(STATUS_TEXT.get(e.status, e.status))}: {escape(reason)}</p>')
    warn = s.get("warnings") or []
    if warn:
        body.append('<div class="box warn"><h2>Warnings</h2><ul>'
                    + "".join(f"<li>{escape(str(w))}</li>" for w in warn) + "</ul></div>")
    body += [
        _headline(s),
        "<h2>Observations and model</h2>", _observed_table(s, full=True),
        "<h2>Parameters</h2>", _parameters_table(s),
        "<h2>Derived quantities</h2>", _derived_table(s),
        _comparison_html(s),
        "<h2>Sampler diagnostics</h2>", _sampler_html(s),
        "<h2>Plots</h2>", _star_figures(out_dir, e),
        _files_html(out_dir, e),
    ]
    return _page(f"{e.id}: radwalk", "\n".join(b for b in body if b), nav='<a href="index.html">catalog</a>')


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
