"""The report and the summary table show an evolving star's age, lifetime, centre and convection beside its
timescales, and a polytrope fit (which has none of those) without them and without failing.

The run folder holds summary.json documents as a fit writes them (radwalk.results.document.document); the
grid-model star's numbers are invented (no grid is built here), the polytrope star is a real short fit.
"""

import json
import math
from html.parser import HTMLParser

import numpy as np
import pytest

from radwalk.forward.one_star import SUMMARY_ROWS, summary_key
from radwalk.forward.quantities import CATALOGUE
from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.plugins.likelihoods import MODEL_ERROR
from radwalk.report import figures as plots
from radwalk.report.pages import star_page_name, write_report
from radwalk.results.document import document
from radwalk.results.files import dumps, write_json
from radwalk.results.layout import STAR_SUMMARY, safe_folder_name
from radwalk.results.table import build_summary_table


class Text(HTMLParser):
    """The words of a page as a browser shows them (tags and the inline style and script left out)."""

    INLINE = {"a", "span", "sub", "sup", "b", "i", "em", "strong", "code", "small"}

    def __init__(self, html: str):
        super().__init__(convert_charrefs=True)
        self.parts, self.skip = [], 0
        self.feed(html)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.skip += tag in ("style", "script")
        if tag not in self.INLINE:
            self.parts.append(" ")

    def handle_endtag(self, tag):
        self.skip -= tag in ("style", "script")
        if tag not in self.INLINE:
            self.parts.append(" ")

    def handle_data(self, data):
        if not self.skip:
            self.parts.append(data)

    def all_text(self) -> str:
        return " ".join("".join(self.parts).split())


def page_text(path) -> str:
    return Text(path.read_text(encoding="utf-8")).all_text()


def star_page(run, star_id):
    return run / "report" / star_page_name(safe_folder_name(star_id))


SMALL = RunConfig(stages={"profile": "polytrope", "relation": "homology"},
                  sampler=SamplerConfig(walkers=8, chunk=100, max_steps=200, derived_samples=60,
                                        optimizer_starts=2))
GRID_ID = "Evolved one"
POLY_ID = "Polytrope two"


def _entry(unit, p50, spread=0.05):
    return {"unit": unit, "p16": p50 * (1 - spread), "p50": p50, "p84": p50 * (1 + spread), "map": p50}


def grid_document():
    """summary.json of a star fitted with an evolving model (invented numbers, the fields a fit writes)."""
    derived = {
        "radius": _entry("R_sun", 1.22), "luminosity": _entry("L_sun", 1.5), "teff": _entry("K", 5790.0, 0.01),
        "main_sequence_lifetime": _entry("Gyr", 7.9), "central_hydrogen": _entry("", 0.28),
        "diffusion_time": _entry("yr", 1.9e5), "energy_transport_time": _entry("yr", 2.9e7),
        "kelvin_helmholtz_time": _entry("yr", 1.6e7), "convective_core_mass_fraction": _entry("", 0.0, 0.0),
        "convective_envelope_base_radius": _entry("", 0.71), "convective_turnover_time": _entry("d", 22.0),
    }
    params = {"mass": {**_entry("M_sun", 1.10), "prior": "log-uniform[0.1, 60]", "constrained": True},
              "age": {**_entry("Gyr", 5.3, 0.2), "prior": "uniform[0, 13.8]", "constrained": True}}
    return document(GRID_ID, "ok", "", {"radius": (1.2234, 0.0053), "luminosity": (1.521, 0.015),
                                        "teff": (5795.0, 19.0)}, (0.22, 0.05), 1, 10.0, luminosity_derived=True,
                    opacity="combined", stages={"profile": "track-grid", "relation": "track-grid"},
                    parameters=params, fixed={f"floor_{key}": MODEL_ERROR[key] for key in MODEL_ERROR},
                    derived=derived,
                    sampler={"walkers": 24, "steps": 3000, "converged": True, "tau_max": 40.0},
                    ppc_pvalue=0.4, unconstrained=[], warnings=[])


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out = tmp_path_factory.mktemp("evolved-run")
    folder = out / "stars" / safe_folder_name(GRID_ID)
    folder.mkdir(parents=True)
    write_json(folder / STAR_SUMMARY, grid_document())
    star = Star.from_user_units(POLY_ID, 1.0, 0.02, 1.0, 0.05, 5772, 60)
    assert fit_star(star, SMALL, out / "stars" / safe_folder_name(POLY_ID), plots=False).status != "failed"
    write_report(out)
    return out


def summary(run, star_id):
    return json.loads((run / "stars" / safe_folder_name(star_id) / STAR_SUMMARY).read_text())


def test_summary_json_names_are_the_model_keys_without_their_unit(run):
    # `radwalk model --json` writes <name>_<unit> (radius_rsun, age_gyr); summary.json writes <name>
    s = summary(run, POLY_ID)
    fitted = set(s["parameters"]) | set(s["derived"])
    evolving = {"age", "main_sequence_lifetime"}  # a polytrope has neither
    for name in SUMMARY_ROWS:
        key = summary_key(name)
        assert key == name if not CATALOGUE[name].output_unit else key.startswith(name + "_")
        if name not in evolving:
            assert name in fitted, name
    assert set(s["derived"]) <= set(CATALOGUE)
    grid = summary(run, GRID_ID)
    assert "age" in grid["parameters"] and "main_sequence_lifetime" in grid["derived"]


def test_polytrope_fit_has_no_turnover_time_and_no_age(run):
    s = summary(run, POLY_ID)
    assert "age" not in s["parameters"] and "main_sequence_lifetime" not in s["derived"]
    turnover = s["derived"]["convective_turnover_time"]
    assert turnover["p50"] is None  # NaN for every sample of a polytrope, written as null
    assert s["luminosity_derived"] is False and summary(run, GRID_ID)["luminosity_derived"] is True


def headers(text: str) -> str:
    """The header row of the catalog's table of stars."""
    return text[text.index("# Star Status"):text.index("Warnings Reason")]


def test_catalog_table_shows_the_evolution_columns(run):
    text = page_text(run / "report" / "index.html")
    assert headers(text) == ("# Star Status M [M☉] R [R☉] L [L☉] Teff [K] age [Gyr] tMS [Gyr] Xc tdiff [yr] "
                             "tth [yr] tKH [yr] ")
    assert "energy-transport (thermal) time U/L" in text


def test_catalog_table_leaves_out_columns_no_star_has(run, tmp_path):
    import shutil

    only = tmp_path / "run"
    shutil.copytree(run, only)
    shutil.rmtree(only / "stars" / safe_folder_name(GRID_ID))
    write_report(only)
    text = page_text(only / "report" / "index.html")
    assert headers(text) == "# Star Status M [M☉] R [R☉] L [L☉] Teff [K] Xc tdiff [yr] tth [yr] tKH [yr] "


def test_star_page_headline_and_derived_rows(run):
    text = page_text(star_page(run, GRID_ID))
    for words in ("Age", "Main-sequence lifetime", "Central hydrogen Xc", "Photon diffusion time",
                  "Energy-transport time U/L", "Convective core Mcc/M", "Envelope base rce/R",
                  "Convective turnover time"):
        assert words in text, words
    headline = text[:text.index("Observations and model")]
    assert headline.index("Photon diffusion time") < headline.index("Energy-transport time U/L")
    for name in ("main_sequence_lifetime", "central_hydrogen", "energy_transport_time",
                 "convective_envelope_base_radius", "convective_turnover_time"):
        assert name in text  # the derived table names every quantity
    assert "(derived from R and T_eff; not used in the fit)" in text
    # residuals in the fit's sigma: R 1.22 against 1.2234 +/- 0.0053 with a 10.6 % model error is -0.03 sigma
    sigma = math.hypot(0.0053, MODEL_ERROR["radius"] * 1.2234)
    assert f"{(1.22 - 1.2234) / sigma:+.2f} σ".replace("-", "−") in text
    assert "the model's own error (R 10.6 %, L 26.8 %, T_eff 4.3 % of the value)" in text


def test_a_real_fit_records_its_model_errors(run):
    assert summary(run, POLY_ID)["fixed"] == pytest.approx(
        {**summary(run, POLY_ID)["fixed"], **{f"floor_{key}": v for key, v in MODEL_ERROR.items()}})


def test_polytrope_star_page_shows_what_it_has(run):
    text = page_text(star_page(run, POLY_ID))
    headline = text[:text.index("Observations and model")]
    assert "Photon diffusion time" in headline and "Energy-transport time U/L" in headline
    assert "Age" not in headline and "Main-sequence lifetime" not in headline
    assert "Convective turnover time" not in headline  # null: left out of the headline, a dash in the table
    assert "not used in the fit" not in text


def test_summary_table_has_the_evolution_columns_and_nan_for_the_polytrope(run):
    docs = [summary(run, GRID_ID), summary(run, POLY_ID)]
    table = build_summary_table(docs)
    for col in ("age_p50", "main_sequence_lifetime_p50", "central_hydrogen_p50", "energy_transport_time_p50",
                "diffusion_time_p50", "convective_turnover_time_p50", "convective_envelope_base_radius_p50"):
        assert col in table.colnames, col
    assert table["age_p50"][0] == pytest.approx(5.3) and math.isnan(table["age_p50"][1])
    assert str(table["main_sequence_lifetime_p50"].unit) == "Gyr"
    assert math.isnan(table["convective_turnover_time_p50"][1])


def test_catalog_timescale_plot_includes_the_energy_transport_time(run):
    docs = [json.loads(dumps(summary(run, sid))) for sid in (GRID_ID, POLY_ID)]
    ax = plots.timescales_vs_mass_figure(docs).axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("energy-transport" in lab for lab in labels)
    assert any("main-sequence lifetime" in lab for lab in labels)
    def points(words):  # converged and not-converged stars are separate containers of one series
        return np.concatenate([c.lines[0].get_ydata() for c in ax.containers if words in c.get_label()])

    # 7.9 Gyr drawn in yr, and only for the star whose model has a lifetime
    assert np.allclose(points("main-sequence lifetime"), [7.9e9])
    assert len(points("energy-transport")) == 2 and np.isclose(points("energy-transport"), 2.9e7).any()
