"""The static HTML report (`radwalk report DIR`, issue 4 item 5), built from a real small run folder.

The run folder is made here with radwalk.inference.fit.fit_star (no catalog runner needed): a solar-like
star whose id has a space (with its PNGs), one whose id is an HTML script tag, one with an unsafe
id that no main-sequence model fits, and one fitted under two opacity laws (without PNGs, to keep
the fixture short).  The browser tests load the report in Debian's headless Chromium from
the file system; they skip when chromium is not installed (.ci/run installs it).
"""

from __future__ import annotations

import argparse
import json
import shutil
import struct
import subprocess
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import numpy as np
import pytest
from astropy.table import Table

from radwalk import __version__
from radwalk.cli.report import add_report_parser, cmd_report
from radwalk.errors import ConfigError
from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.report.figures import mass_recovery_figure
from radwalk.report.pages import (
    interval,
    like,
    plus_minus,
    star_page_name,
    unconstrained_sentence,
    write_report,
)
from radwalk.results.layout import safe_folder_name
from radwalk.run.orchestrate import write_run_toml

SCRIPT_ID = "<script>alert(1)</script>"
CHROMIUM = shutil.which("chromium")
NEEDS_CHROMIUM = pytest.mark.skipif(CHROMIUM is None, reason="chromium not installed (.ci/run installs Debian's)")
STAR_PNGS = ("corner_parameters.png", "corner_timescales.png", "trace.png", "profile.png", "predictive.png")

STARS = (
    Star.from_user_units("Alpha one", 1.0, 0.02, 1.0, 0.05, 5772, 60),
    Star.from_user_units(SCRIPT_ID, 0.9, 0.03, 0.7, 0.05, 5550, 80),
    # 50 R_sun at 1 L_sun: no main-sequence model reaches it, so this star fails
    Star.from_user_units("a/b", 50.0, 1.0, 1.0, 0.05),
    Star.from_user_units("Gamma two laws", 1.1, 0.03, 1.3, 0.08, 5900, 70),
)
TWO_LAWS = ("combined", "kramers")
PROVENANCE = {"radwalk": __version__, "numpy": np.__version__, "seed": 1, "executor": "local", "workers": 1,
              "first_started": "2026-01-02T03:04:05Z", "started": "2026-01-02T03:04:05Z",
              "finished": "2026-01-02T03:05:00Z"}
# The quick textbook stages, named: these tests are about the report, and a polytrope fit takes seconds.
QUICK_STAGES = {"profile": "polytrope", "relation": "homology"}
FAST = RunConfig(stages=QUICK_STAGES, sampler=SamplerConfig(walkers=16, chunk=200, max_steps=600, derived_samples=200))


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    """A run folder with the four stars fitted, run.toml, and the report written."""
    out = tmp_path_factory.mktemp("run")
    results = {}
    for star in STARS:
        two = star.id == "Gamma two laws"
        config = FAST.with_changes(stages={**QUICK_STAGES, "opacity": TWO_LAWS}) if two else FAST
        plots = star.id == "Alpha one"
        results[star.id] = fit_star(star, config, out / "stars" / safe_folder_name(star.id), plots=plots)
    assert results["a/b"].status == "failed"
    for sid in ("Alpha one", SCRIPT_ID, "Gamma two laws"):
        assert results[sid].status in ("ok", "not-converged"), results[sid].reason
    write_run_toml(out / "run.toml", FAST, PROVENANCE)
    write_report(out)
    return out


def summary_of(run_dir: Path, star_id: str) -> dict:
    return json.loads((run_dir / "stars" / safe_folder_name(star_id) / "summary.json").read_text())


def page_of(run_dir: Path, star_id: str) -> Path:
    return run_dir / "report" / star_page_name(safe_folder_name(star_id))


class Page(HTMLParser):
    """Collects tags, attributes and text of one HTML document and checks that elements nest."""

    VOID = {"meta", "link", "img", "br", "hr", "input", "source", "col", "area", "base", "wbr"}
    INLINE = {"a", "span", "sub", "sup", "b", "i", "em", "strong", "code", "small"}

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.scripts: list[str] = []
        self.stack: list[str] = []
        self.errors: list[str] = []
        self._in_script = False
        self._in_style = False
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in self.VOID:
            self.stack.append(tag)
        if tag not in self.INLINE:
            self.text.append(" ")  # a block or a cell boundary separates words as a browser shows them
        if tag == "script":
            self._in_script = True
            self.scripts.append("")
        self._in_style = self._in_style or tag == "style"

    def handle_endtag(self, tag):
        if tag in self.VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()
        if tag not in self.INLINE:
            self.text.append(" ")
        if tag == "script":
            self._in_script = False
        if tag == "style":
            self._in_style = False

    def handle_data(self, data):
        if self._in_script:
            self.scripts[-1] += data
        elif not self._in_style:
            self.text.append(data)

    def all_text(self) -> str:
        return " ".join("".join(self.text).split())

    def attrs(self, tag: str, name: str) -> list[str]:
        return [a[name] for t, a in self.tags if t == tag and name in a]

    def status_rows(self) -> list[str]:
        """Classes of the star rows (row-<status>) of the catalog table, in page order."""
        return [a.get("class", "") for t, a in self.tags if t == "tr" and a.get("class", "").startswith("row-")]


def parse(path: Path) -> Page:
    return Page(path.read_text(encoding="utf-8"))


def relative_targets(page: Page) -> list[str]:
    out = []
    for url in page.attrs("img", "src") + page.attrs("a", "href"):
        parts = urlsplit(url)
        if parts.scheme or parts.netloc or url.startswith("#"):
            continue
        out.append(parts.path)
    return out


# ---------------------------------------------------------------- the files


def test_every_relative_link_and_image_resolves(run_dir):
    report = run_dir / "report"
    pages = sorted(report.glob("*.html"))
    assert all(p.stat().st_mode & 0o044 == 0o044 for p in pages)  # readable by others, to be shared
    assert {p.name for p in pages} == {"index.html"} | {star_page_name(safe_folder_name(s.id)) for s in STARS}
    for path in pages:
        page = parse(path)
        assert page.errors == [], f"{path.name}: {page.errors}"
        assert page.stack == [], f"{path.name}: unclosed {page.stack}"
        targets = relative_targets(page)
        assert targets, path.name
        for target in targets:
            resolved = (path.parent / unquote(target)).resolve()
            assert resolved.is_file(), f"{path.name} links to {target}, which does not exist"
            assert run_dir.resolve() in resolved.parents, f"{path.name} links outside the run folder: {target}"
        for url in page.attrs("img", "src") + page.attrs("a", "href") + page.attrs("link", "href"):
            assert not urlsplit(url).scheme, f"{path.name} refers to {url}: the report must not need a network"


def test_index_lists_every_star_with_its_page(run_dir):
    page = parse(run_dir / "report" / "index.html")
    hrefs = page.attrs("a", "href")
    for star in STARS:
        assert star_page_name(safe_folder_name(star.id)) in [unquote(h) for h in hrefs]
    text = page.all_text()
    assert "Alpha one" in text and SCRIPT_ID in text and "a/b" in text
    # rows: no summary.ecsv here, so sorted by id: '<' sorts before 'A' before 'a'
    assert text.index(SCRIPT_ID) < text.index("Alpha one") < text.index("Gamma two laws") < text.index("a/b")
    statuses = [summary_of(run_dir, s.id)["status"] for s in sorted(STARS, key=lambda s: s.id)]
    assert page.status_rows() == [f"row-{s}" for s in statuses]
    assert "1 failed" in text
    for header in ("M [M☉]", "R [R☉]", "L [L☉]", "Teff [K]", "tdiff [yr]", "tKH [yr]", "Warnings"):
        assert header in text
    # the seed and stages of the run are shown
    assert "Seed 1" in text and "Full run configuration (run.toml)" in text
    assert f"Versions radwalk {__version__}, numpy {np.__version__}" in text
    assert "Ran 2026-01-02T03:04:05Z to 2026-01-02T03:05:00Z" in text and "Executor local, 1 worker(s)" in text


def test_unsafe_ids_are_escaped_everywhere(run_dir):
    for path in (run_dir / "report").glob("*.html"):
        raw = path.read_text(encoding="utf-8")
        assert SCRIPT_ID not in raw, f"{path.name} contains the id unescaped"
        page = parse(path)
        assert all("alert" not in s for s in page.scripts), path.name
        assert len(page.scripts) <= 1, f"{path.name} has {len(page.scripts)} scripts"
    own = parse(page_of(run_dir, SCRIPT_ID))
    assert f"{SCRIPT_ID} not converged" in own.all_text() or f"{SCRIPT_ID} ok" in own.all_text()  # the h1
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in (run_dir / "report" / "index.html").read_text()
    # the folder and page names never leave the run folder
    for star in STARS:
        assert "/" not in safe_folder_name(star.id) and ".." not in safe_folder_name(star.id)


def test_failed_star_shows_reason_and_observations_only(run_dir):
    s = summary_of(run_dir, "a/b")
    assert s["status"] == "failed" and "no model" in s["reason"]
    text = parse(page_of(run_dir, "a/b")).all_text()
    assert s["reason"] in text
    assert "This star could not be fitted" in text
    assert "50.0 ± 1.0" in text and "not measured" in text  # T_eff was not given (null in summary.json)
    assert "Parameters" not in text and "Sampler diagnostics" not in text
    assert s["reason"] in parse(run_dir / "report" / "index.html").all_text()


def test_fitted_star_page_has_every_table(run_dir):
    s = summary_of(run_dir, "Alpha one")
    text = parse(page_of(run_dir, "Alpha one")).all_text()
    for heading in ("Observations and model", "Parameters", "Derived quantities", "Sampler diagnostics", "Plots"):
        assert heading in text
    for name in s["parameters"]:
        assert name in text
    for kind in ("log-uniform[0.1, 60]", "uniform[1.5, 3.5]"):  # the default priors of mass and n
        assert kind in text
    assert "photon diffusion time, centre to surface" in text and "Kelvin-Helmholtz time" in text
    assert "g cm−3" in text  # central density unit
    assert "Posterior-predictive p-value" in text and "Acceptance fraction" in text
    for w in s["warnings"]:
        assert w in text
    if s["unconstrained"]:
        assert unconstrained_sentence(s) in text
    assert "by R, L, T_eff" in unconstrained_sentence(s)
    # plain-sentence form for one unconstrained parameter
    one = {"unconstrained": ["n"], "observed": {"radius": {"value": 1.0}, "luminosity": {"value": float("nan")}}}
    assert unconstrained_sentence(one) == ("The polytropic index n is not constrained by R: "
                                           "its interval reflects the prior.")


def test_opacity_laws_side_by_side(run_dir):
    s = summary_of(run_dir, "Gamma two laws")
    assert set(s["comparison"]) == set(TWO_LAWS)
    page = parse(page_of(run_dir, "Gamma two laws"))
    text = page.all_text()
    assert "Opacity laws compared" in text and "combined (primary)" in text and "kramers" in text
    row = text[text.index("Opacity laws compared"):]
    for law in TWO_LAWS:
        m = s["comparison"][law]["parameters"]["mass"]
        assert interval_text(m) in row, law
        assert interval_text(s["comparison"][law]["derived"]["diffusion_time"]) in row, law


def interval_text(d: dict) -> str:
    """The text a browser shows for an interval cell."""
    return Page(interval(d)).all_text()


def test_missing_images_give_a_note_not_a_broken_image(run_dir, tmp_path):
    run = tmp_path / "run"
    shutil.copytree(run_dir, run)
    folder = run / "stars" / safe_folder_name("Alpha one")
    for png in folder.glob("*.png"):
        png.unlink()
    (run / "report" / "hr_diagram.png").unlink(missing_ok=True)
    write_report(run)
    page = parse(page_of(run, "Alpha one"))
    assert page.attrs("img", "src") == []
    assert "Not available (no image was written)" in page.all_text()
    for target in relative_targets(parse(run / "report" / "index.html")):
        assert (run / "report" / unquote(target)).resolve().is_file()


def test_star_and_catalog_images_are_shown(run_dir):
    s = summary_of(run_dir, "Alpha one")
    folder = safe_folder_name("Alpha one")
    srcs = parse(page_of(run_dir, "Alpha one")).attrs("img", "src")
    assert srcs == [f"../stars/{folder}/{png}" for png in STAR_PNGS]  # in the page's order
    assert all((run_dir / "stars" / folder / png).is_file() for png in STAR_PNGS)
    assert set(s["plots"]) == {p.removesuffix(".png") for p in STAR_PNGS}
    # a star fitted without PNGs gets a note instead of images: that none was drawn, and how to draw them
    page = parse(page_of(run_dir, SCRIPT_ID))
    assert page.attrs("img", "src") == [] and "No plots were drawn for this star" in page.all_text()
    assert "Not available (no image was written)" not in page.all_text()
    srcs = parse(run_dir / "report" / "index.html").attrs("img", "src")
    # a star of this run is fitted under two laws (TWO_LAWS): the page compares them after the catalog plots
    assert srcs == ["hr_diagram.png", "timescales_vs_mass.png", "law_comparison.png"]


def test_catalog_order_from_summary_table_and_unfinished_stars(run_dir, tmp_path):
    run = tmp_path / "run"
    shutil.copytree(run_dir, run)
    order = ["a/b", "Beta not started", "Alpha one", SCRIPT_ID]
    Table({"id": order}).write(run / "summary.ecsv", format="ascii.ecsv")
    order.append("Gamma two laws")  # a finished star missing from the table comes after it
    # a star killed mid-run has a folder but no summary.json
    (run / "stars" / safe_folder_name(SCRIPT_ID) / "summary.json").unlink()
    write_report(run)
    page = parse(run / "report" / "index.html")
    text = page.all_text()
    positions = [text.index(x) for x in order]
    assert positions == sorted(positions)
    assert page.status_rows()[1] == "row-pending" and page.status_rows()[3] == "row-pending"
    assert "not started" in text and "no summary.json yet" in text
    hrefs = [unquote(h) for h in page.attrs("a", "href")]
    assert star_page_name(safe_folder_name("Beta not started")) not in hrefs
    assert "2 not finished" in text


def test_an_unreadable_summary_costs_one_row_not_the_report(run_dir, tmp_path):
    run = tmp_path / "run"
    shutil.copytree(run_dir, run)
    (run / "stars" / safe_folder_name("Alpha one") / "summary.json").write_text('{"id": "Alpha one", "stat')
    write_report(run)
    page = parse(run / "report" / "index.html")
    assert "row-unreadable" in page.status_rows()
    assert "summary.json cannot be read" in page.all_text()
    assert len(page.status_rows()) == len(STARS)


def test_not_a_run_folder_is_a_config_error(tmp_path):
    with pytest.raises(ConfigError, match="not a radwalk run folder"):
        write_report(tmp_path)
    with pytest.raises(ConfigError, match="is not a folder"):
        write_report(tmp_path / "nothing-here")


def test_cli_command_prints_the_index(run_dir, capsys):
    parser = argparse.ArgumentParser()
    sub = parser.add_subparsers(dest="command", required=True)
    add_report_parser(sub, argparse.ArgumentParser(add_help=False))
    args = parser.parse_args(["report", str(run_dir)])
    assert args.func is cmd_report
    assert args.func(args) == 0
    assert capsys.readouterr().out.strip() == str(run_dir / "report" / "index.html")


def test_page_name_of_a_star_called_index_keeps_the_catalog_page():
    assert star_page_name(safe_folder_name("index")) != "index.html"
    assert star_page_name("Alpha_one-4af123d5") == "Alpha_one-4af123d5.html"


@pytest.mark.parametrize("d, html", [
    ({"p16": 0.9546, "p50": 0.9932, "p84": 1.028}, "0.993<span class=\"pm\"><sup>+0.035</sup><sub>−0.039</sub></span>"),
    ({"p16": 1.43e7, "p50": 1.84e7, "p84": 2.54e7}, "1.84<span class=\"pm\"><sup>+0.70</sup><sub>−0.41</sub></span>"
                                                    " × 10<sup>7</sup>"),
    ({"p16": 50503, "p50": 64853, "p84": 155000}, "65000<span class=\"pm\"><sup>+90000</sup><sub>−14000</sub></span>"),
    ({"p16": float("nan"), "p50": float("nan"), "p84": float("nan")}, "<span class=\"muted\">–</span>"),
])
def test_intervals_round_to_the_error(d, html):
    assert interval(d) == html


# Worked by hand with the rule "two significant digits of the smaller error" (common practice, no source).
@pytest.mark.parametrize("d, html", [
    # +0.012/-0.011: the smaller error 0.011 has its second digit at 1e-3, so three decimals, not six
    ({"p16": 1.223456, "p50": 1.234567, "p84": 1.246789},
     "1.235<span class=\"pm\"><sup>+0.012</sup><sub>−0.011</sub></span>"),
    # +25000/-3100 at 10^5: the mantissa's smaller error 0.031 sets three decimals, the larger one follows
    ({"p16": 1.2039e5, "p50": 1.2349e5, "p84": 1.4849e5},
     "1.235<span class=\"pm\"><sup>+0.250</sup><sub>−0.031</sub></span> × 10<sup>5</sup>"),
    # +/-0.0004 on 0.98765: two significant digits of 0.0004 are 0.00040, so five decimals
    ({"p16": 0.98725, "p50": 0.98765, "p84": 0.98805},
     "0.98765<span class=\"pm\"><sup>+0.00040</sup><sub>−0.00040</sub></span>"),
    # a fraction piled at 1 (+1.5e-10/-0.6257): the tiny upper error does not ask for ten decimals
    ({"p16": 0.374329695820449, "p50": 0.9999999998496261, "p84": 1.0},
     "1.00<span class=\"pm\"><sup>+0.00</sup><sub>−0.63</sub></span>"),
])
def test_interval_precision_hand_worked(d, html):
    assert interval(d) == html


def test_percentiles_and_measurements_to_their_errors_precision():
    d = {"p16": 1.223456, "p50": 1.234567, "p84": 1.246789}
    assert like(1.2399876, d) == "1.240"  # a MAP beside that interval: three decimals too
    assert like(1.2399876, None) == "1.24"  # no interval: the plain four significant digits
    assert plus_minus(1.0, 0.02) == "1.000 ± 0.020"
    assert plus_minus(5772, 60) == "5772 ± 60"
    assert plus_minus(0.98765, 0.0123) == "0.988 ± 0.012"
    assert plus_minus(2.3456e7, 4.1e6) == "2.35 ± 0.41 × 10<sup>7</sup>"


# ---------------------------------------------------------------- in the browser


def chromium(tmp_path: Path, *args: str, timeout: float = 60) -> subprocess.CompletedProcess:
    profile = tmp_path / f"chromium-profile-{len(list(tmp_path.glob('chromium-profile-*')))}"
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--hide-scrollbars", f"--user-data-dir={profile}", *args]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    assert proc.returncode == 0, proc.stderr[-2000:]
    return proc


# Loads every page reachable from the start page in an iframe (same origin for file:// pages with
# --allow-file-access-from-files) and records, per page, its title, whether each image decoded,
# whether the page's script ran, and the row order of the catalog table before and after a click
# on the mass header.  With SCRIPTS false the iframe is sandboxed without allow-scripts: JS off.
CRAWLER = """<!DOCTYPE html><html><head><meta charset="utf-8"><title>crawl</title></head><body>
<iframe id="f" width="1280" height="1600"></iframe><pre id="result"></pre>
<script>
var queue = [START], seen = {}, pages = [];
seen[START] = true;
var f = document.getElementById("f");
if (!SCRIPTS) f.setAttribute("sandbox", "allow-same-origin");
function ids(d) {
  return Array.prototype.map.call(d.querySelectorAll("#stars tbody td.id"), function (x) { return x.textContent; });
}
function next() {
  if (!queue.length) { document.getElementById("result").textContent = JSON.stringify(pages); return; }
  var url = queue.shift();
  f.onload = function () {
    var rec = {url: url, images: [], links: []};
    try {
      var d = f.contentDocument;
      rec.title = d.title;
      rec.h1 = d.querySelector("h1") ? d.querySelector("h1").textContent : null;
      rec.js = d.documentElement.classList.contains("js");
      rec.rows = ids(d);
      d.querySelectorAll("img").forEach(function (i) {
        rec.images.push({src: i.getAttribute("src"), ok: i.complete && i.naturalWidth > 0});
      });
      d.querySelectorAll("a[href]").forEach(function (a) {
        var h = a.href.split("#")[0];
        rec.links.push(h);
        if (h.indexOf("file:") === 0 && /[.]html$/.test(h) && !seen[h]) { seen[h] = true; queue.push(h); }
      });
      var th = Array.prototype.filter.call(d.querySelectorAll("#stars th"),
                                           function (x) { return x.textContent.indexOf("M ") === 0; })[0];
      if (th) { th.click(); rec.sorted = ids(d); }
    } catch (e) { rec.error = String(e); }
    pages.push(rec);
    setTimeout(next, 0);
  };
  f.src = url;
}
next();
</script></body></html>
"""


def crawl(run: Path, tmp_path: Path, scripts: bool = True) -> list[dict]:
    start = (run / "report" / "index.html").resolve().as_uri()
    checker = tmp_path / "crawl.html"
    checker.write_text(CRAWLER.replace("START", json.dumps(start)).replace("SCRIPTS", json.dumps(scripts)))
    proc = chromium(tmp_path, "--allow-file-access-from-files", "--virtual-time-budget=15000",
                    "--dump-dom", checker.as_uri())
    page = Page(proc.stdout)
    data = page.all_text()
    start_json = data.index("[{")
    return json.loads(data[start_json:data.rindex("}]") + 2])


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_pages_load_in_chromium_with_escaped_ids(run_dir, tmp_path):
    for star_id in ("Alpha one", SCRIPT_ID):
        dom = chromium(tmp_path, "--dump-dom", page_of(run_dir, star_id).resolve().as_uri()).stdout
        page = Page(dom)
        assert star_id in page.all_text()
        assert all("alert" not in s for s in page.scripts)
        assert "Derived quantities" in page.all_text()
    dom = chromium(tmp_path, "--dump-dom", (run_dir / "report" / "index.html").resolve().as_uri()).stdout
    page = Page(dom)
    assert len(page.status_rows()) == len(STARS)
    assert SCRIPT_ID in page.all_text()
    assert len(page.scripts) == 1 and "alert" not in page.scripts[0]
    assert 'class="js"' in dom  # the report's own script ran (allowed by its hash)


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_every_page_image_and_link_works_in_chromium(run_dir, tmp_path):
    pages = crawl(run_dir, tmp_path)
    expected = {(run_dir / "report" / "index.html").resolve().as_uri()}
    expected |= {page_of(run_dir, s.id).resolve().as_uri() for s in STARS}
    assert {p["url"] for p in pages} == expected
    for p in pages:
        assert "error" not in p, p
        assert p["title"] and p["h1"], p["url"]
        broken = [i["src"] for i in p["images"] if not i["ok"]]
        assert broken == [], f"{p['url']}: broken images {broken}"
    # the catalog plots, the comparison of the opacity laws (a star is fitted under TWO_LAWS) and Alpha one's
    assert sum(len(p["images"]) for p in pages) == 3 + len(STAR_PNGS)
    index = next(p for p in pages if p["url"].endswith("/index.html"))
    assert index["js"] and index["rows"] == sorted(s.id for s in STARS)
    masses = {s.id: summary_of(run_dir, s.id).get("parameters", {}).get("mass", {}).get("p50") for s in STARS}
    want = sorted((i for i in masses if masses[i] is not None), key=masses.get) + ["a/b"]
    assert index["sorted"] == want  # clicking the mass header sorts by mass, the failed star last


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_chromium_check_catches_a_missing_image(run_dir, tmp_path):
    run = tmp_path / "run"
    shutil.copytree(run_dir, run)
    (run / "stars" / safe_folder_name("Alpha one") / "trace.png").unlink()  # after the report was written
    pages = crawl(run, tmp_path)
    broken = [(p["url"], i["src"]) for p in pages for i in p["images"] if not i["ok"]]
    assert broken == [(page_of(run, "Alpha one").resolve().as_uri(),
                       f"../stars/{safe_folder_name('Alpha one')}/trace.png")]


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_report_works_without_javascript(run_dir, tmp_path):
    pages = crawl(run_dir, tmp_path, scripts=False)
    assert len(pages) == 1 + len(STARS)
    for p in pages:
        assert "error" not in p and not p["js"], p
        assert all(i["ok"] for i in p["images"]), p["url"]
    index = next(p for p in pages if p["url"].endswith("/index.html"))
    catalog_order = sorted(s.id for s in STARS)  # no summary.ecsv: sorted ids
    assert index["rows"] == catalog_order and index["sorted"] == catalog_order




# ---------------------------------------------------------------- issue 12 item 5: downloads, badges, labels, truths


def copied_run(run_dir: Path, tmp_path: Path) -> Path:
    run = tmp_path / "run"
    shutil.copytree(run_dir, run)
    return run


def test_downloads_link_only_the_files_that_exist(run_dir, tmp_path):
    links = parse(run_dir / "report" / "index.html").attrs("a", "href")
    assert "../run.toml" in links  # the fixture has run.toml but no summary table (no catalog runner)
    assert "../summary.ecsv" not in links and "../summary.fits" not in links
    run = copied_run(run_dir, tmp_path)
    table = Table({"id": [s.id for s in STARS], "folder": [safe_folder_name(s.id) for s in STARS]})
    table.write(run / "summary.ecsv", format="ascii.ecsv")
    table.write(run / "summary.fits")
    (run / "run.toml").unlink()
    write_report(run)
    page = parse(run / "report" / "index.html")
    downloads = [h for h in page.attrs("a", "href") if h.startswith("../") and "/" not in h[3:]]
    assert sorted(downloads) == ["../summary.ecsv", "../summary.fits"]
    for href in downloads:  # relative to report/, as the page is opened from disk
        assert (run / "report" / unquote(href)).resolve().is_file()


def test_a_failed_predictive_check_is_never_a_green_ok(run_dir, tmp_path):
    run = copied_run(run_dir, tmp_path)
    folder = run / "stars" / safe_folder_name("Alpha one")
    s = json.loads((folder / "summary.json").read_text())
    # a converged star whose replicated data nearly always fit better than the observed
    s.update(status="ok", ppc_pvalue=0.0031)
    (folder / "summary.json").write_text(json.dumps(s))
    write_report(run)
    star = parse(page_of(run, "Alpha one"))
    badges = [a["class"] for t, a in star.tags if t == "span" and "badge" in a.get("class", "")]
    assert badges == ["badge st-poor-fit"]
    assert "poor fit, p = 0.0031" in star.all_text()
    index = parse(run / "report" / "index.html")
    assert "row-poor-fit" in index.status_rows() and "row-ok" not in index.status_rows()
    assert "1 poor fit" in index.all_text()
    # the same star with a passing check is a plain ok
    s["ppc_pvalue"] = 0.4
    (folder / "summary.json").write_text(json.dumps(s))
    write_report(run)
    assert "row-ok" in parse(run / "report" / "index.html").status_rows()
    star = parse(page_of(run, "Alpha one"))
    assert [a["class"] for t, a in star.tags if t == "span" and "badge" in a.get("class", "")] == ["badge st-ok"]


def ran_text(run: Path) -> str:
    text = parse(run / "report" / "index.html").all_text()
    return text[text.index("Ran "):text.index("Versions")]


@pytest.mark.parametrize("resumed, words", [
    # a fresh run: its state is stamped a second after its start, and it did no star of an earlier run
    (0, None),
    (2, "resumed: 2 stars done by an earlier run, first started 2026-01-01T00:00:00Z"),
])
def test_a_fresh_run_is_not_labelled_resumed(run_dir, tmp_path, resumed, words):
    run = copied_run(run_dir, tmp_path)
    first = "2026-01-02T03:04:04Z" if not resumed else "2026-01-01T00:00:00Z"
    write_run_toml(run / "run.toml", FAST, {**PROVENANCE, "first_started": first, "resumed_stars": resumed})
    write_report(run)
    text = ran_text(run)
    if words is None:
        assert "resumed" not in text and "first" not in text
    else:
        assert words in text
    assert "resumed_stars" not in parse(run / "report" / "index.html").all_text().split("Full run")[0]


def test_star_page_explains_the_photon_time_with_the_ratio_from_the_chain(run_dir):
    import h5py

    folder = run_dir / "stars" / safe_folder_name("Alpha one")
    with h5py.File(folder / "chain.h5", "r") as f:
        ratio = np.asarray(f["derived/energy_transport_time"]) / np.asarray(f["derived/diffusion_time"])
    p16, p50, p84 = np.percentile(ratio[np.isfinite(ratio)], (16, 50, 84))
    text = parse(page_of(run_dir, "Alpha one")).all_text()
    assert "What the photon diffusion time is, and what it is not" in text
    assert "absorbed" in text and "tth = U/L" in text
    want = interval_text({"p16": p16, "p50": p50, "p84": p84})
    assert f"For this star tth / tdiff = {want} (median and 68 % interval of the ratio" in text
    assert p50 > 1  # the gas holds more heat than the radiation: the energy leaves slower than the photons walk


def test_truths_give_the_recovered_against_true_mass_plot(run_dir, tmp_path):
    assert not (run_dir / "report" / "mass_recovery.png").exists()  # a catalog without truths
    assert "Recovered against true" not in parse(run_dir / "report" / "index.html").all_text()
    run = copied_run(run_dir, tmp_path)
    Table({"id": ["Alpha one", "Gamma two laws", "a/b", "not in the run"], "mass": [1.0, 1.1, 1.0, 2.0]},
          units={"mass": "solMass"}).write(run / "truths.ecsv", format="ascii.ecsv")
    write_report(run)
    assert (run / "report" / "mass_recovery.png").is_file()
    page = parse(run / "report" / "index.html")
    assert "mass_recovery.png" in page.attrs("img", "src")
    assert f"true values are read from {run / 'truths.ecsv'}" in page.all_text()


def test_recovery_figure_draws_the_intervals_and_the_one_to_one_line():
    rows = [{"id": "x", "truth": 1.0, "p16": 0.95, "p50": 1.02, "p84": 1.08, "p2_5": 0.9, "p97_5": 1.15, "ok": True},
            {"id": "y", "truth": 2.0, "p16": 1.7, "p50": 1.9, "p84": 2.1, "p2_5": float("nan"),
             "p97_5": float("nan"), "ok": False}]
    fig = mass_recovery_figure(rows)
    ax = fig.axes[0]
    labels = ax.get_legend_handles_labels()[1]
    assert labels == ["1:1 (recovered = true)", "95 % interval", "median, 68 % interval",
                      "median, 68 % interval (not converged)"]
    line = next(ln for ln in ax.get_lines() if ln.get_label().startswith("1:1"))
    assert np.allclose(line.get_xdata(), line.get_ydata())
    lo, hi = ax.get_xlim()
    assert lo < 0.9 and hi > 2.0  # every interval end and truth is inside


# Loads each page in an iframe of each width (the page's viewport) and records, per load, the page's
# scroll width against its viewport, the elements that reach past the viewport and are not inside a box that
# scrolls or clips sideways (a table's .scroll), and each image's shown width.
WIDTH_CHECK = """<!DOCTYPE html><html><head><meta charset="utf-8"><title>width</title></head><body style="margin:0">
<pre id="result"></pre>
<script>
var jobs = [];
PAGES.forEach(function (p) { WIDTHS.forEach(function (w) { jobs.push([p, w]); }); });
var out = [];
function clipped(el) {
  for (var a = el.parentElement; a; a = a.parentElement) {
    var o = getComputedStyle(a).overflowX;
    if (o === "auto" || o === "scroll" || o === "hidden") return true;
  }
  return false;
}
function next() {
  if (!jobs.length) { document.getElementById("result").textContent = JSON.stringify(out); return; }
  var job = jobs.shift(), f = document.createElement("iframe");
  f.width = job[1]; f.height = 900; f.style.border = "0";
  f.onload = function () {
    var d = f.contentDocument, rec = {url: job[0], width: job[1], over: []};
    rec.scrollWidth = d.documentElement.scrollWidth;
    rec.clientWidth = d.documentElement.clientWidth;
    d.querySelectorAll("body *").forEach(function (el) {
      var r = el.getBoundingClientRect();
      if (r.width && (r.right > rec.clientWidth + 1 || r.left < -1) && !clipped(el))
        rec.over.push(el.tagName + "." + el.className + " " + Math.round(r.left) + "-" + Math.round(r.right));
    });
    rec.images = Array.prototype.map.call(d.querySelectorAll("img"), function (i) {
      return {src: i.getAttribute("src"), ok: i.complete && i.naturalWidth > 0,
              right: i.getBoundingClientRect().right};
    });
    out.push(rec);
    document.body.removeChild(f);
    setTimeout(next, 0);
  };
  f.src = job[0];
  document.body.appendChild(f);
}
next();
</script></body></html>
"""
PHONE, DESKTOP = 390, 1280  # CSS px: a common phone's width and a laptop's


def page_widths(pages: list[Path], tmp_path: Path, widths=(PHONE, DESKTOP)) -> list[dict]:
    checker = tmp_path / "width.html"
    urls = [p.resolve().as_uri() for p in pages]
    checker.write_text(WIDTH_CHECK.replace("PAGES", json.dumps(urls)).replace("WIDTHS", json.dumps(list(widths))))
    proc = chromium(tmp_path, "--allow-file-access-from-files", "--virtual-time-budget=30000", "--dump-dom",
                    checker.as_uri())
    data = Page(proc.stdout).all_text()
    found = json.loads(data[data.index("[{"):data.rindex("}]") + 2])
    assert len(found) == len(urls) * len(widths)
    return found


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_no_page_is_wider_than_a_phone_or_a_desktop_screen(run_dir, tmp_path):
    pages = [run_dir / "report" / "index.html"] + [page_of(run_dir, s.id) for s in STARS]
    for rec in page_widths(pages, tmp_path):
        where = f"{rec['url']} at {rec['width']} px"
        assert rec["clientWidth"] == rec["width"], where
        assert rec["scrollWidth"] <= rec["clientWidth"], f"{where}: content {rec['scrollWidth']} px wide"
        assert rec["over"] == [], f"{where}: past the edge {rec['over']}"
        for img in rec["images"]:
            assert img["ok"] and img["right"] <= rec["width"] + 1, f"{where}: {img}"


@NEEDS_CHROMIUM
@pytest.mark.browser
def test_width_check_catches_a_page_wider_than_the_screen(run_dir, tmp_path):
    run = copied_run(run_dir, tmp_path)
    index = run / "report" / "index.html"
    index.write_text(index.read_text().replace("<h2 id=\"run\">", '<div style="width:600px">x</div><h2 id="run">'))
    phone, desktop = page_widths([index], tmp_path)
    assert phone["scrollWidth"] > PHONE and phone["over"]
    assert desktop["scrollWidth"] == DESKTOP and desktop["over"] == []


@NEEDS_CHROMIUM
@pytest.mark.parametrize("width", [PHONE, DESKTOP])
def test_screenshot_of_the_catalog_page_at_phone_and_desktop_width(run_dir, tmp_path, width):
    shot = tmp_path / "shot.png"
    chromium(tmp_path, f"--screenshot={shot}", f"--window-size={width},2000",
             (run_dir / "report" / "index.html").resolve().as_uri())
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert struct.unpack(">II", data[16:24]) == (width, 2000)
    assert len(data) > 30_000  # a blank page compresses to a few kB
