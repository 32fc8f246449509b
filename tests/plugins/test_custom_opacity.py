"""A user's own opacity law, end to end: installed package, single file, tabulated table, bad inputs.

The example package examples/opacity_plugin (the ``bent-power`` law of
docs/plugins.md) must be installed into the test environment; ``make test``
does that.  The fits use a fast sampler and a fixed polytrope index, so that
the posteriors are narrow enough for a change of opacity law to show.
"""

from __future__ import annotations

import json
import textwrap
import warnings
from importlib.metadata import entry_points
from pathlib import Path

import numpy as np
import pytest

from radwalk.cli.main import main
from radwalk.errors import ValidityWarning
from radwalk.host.config import RunConfig, SamplerConfig
from radwalk.host.contracts import check_target
from radwalk.host.registry import Registry
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "opacity_plugin"
EXAMPLE_MODULE = "radwalk_bent_power"
LAW = "bent-power"
COPY = "bent-power-copy"  # the same law as a single-file plugin, under its own name

# An invented Sun-like test star: R, L in solar units, T_eff in K, each with its error.
STAR = {"radius": (1.0, 0.02), "luminosity": (1.0, 0.05), "teff": (5772.0, 60.0)}
SAMPLER = SamplerConfig(walkers=16, chunk=200, max_steps=1500, derived_samples=100)
# The quick textbook stages (polytrope + homology): these tests are about a plugin law reaching a fit, and the
# default track grid would build a grid of tracks for every law (tests/forward/test_model_grid.py builds one).
# n fixed: the polytrope index is otherwise drawn from its prior and its spread, not the
# opacity law, sets the width of the diffusion-time posterior.
TEXTBOOK = {"profile": "polytrope", "relation": "homology"}
SETTINGS = {"n": 3.0}
FAST_TOML = textwrap.dedent("""\
    [stages]
    profile = "polytrope"
    relation = "homology"

    [sampler]
    walkers = 16
    chunk = 200
    max_steps = 1500
    derived_samples = 100

    [settings]
    n = 3.0
""")
FIT_ARGS = ["--id", "test-star", "--radius", "1", "0.02", "--luminosity", "1", "0.05",
            "--teff", "5772", "60", "--no-plots"]


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def star() -> Star:
    return Star.from_user_units("test-star", **{k: v for k, (v, _) in STAR.items()},
                                **{f"{k}_err": e for k, (_, e) in STAR.items()})


def fit(opacity: str, plugins=(), settings=None) -> dict:
    """The summary of one fit of the test star (what `radwalk fit` runs, without files)."""
    cfg = RunConfig(stages={**TEXTBOOK, "opacity": opacity}, settings={**SETTINGS, **(settings or {})},
                    sampler=SAMPLER, plugins=tuple(str(p) for p in plugins))
    result = fit_star(star(), cfg, outdir=None, plots=False)
    assert result.status != "failed", result.reason
    return result.summary


def median_and_width(summary: dict, group: str, name: str) -> tuple[float, float]:
    """Posterior median and half the 16th-84th percentile range."""
    d = summary[group][name]
    return d["p50"], 0.5 * (d["p84"] - d["p16"])


def assert_changed(a: dict, b: dict, group: str, name: str):
    (ma, sa), (mb, sb) = median_and_width(a, group, name), median_and_width(b, group, name)
    assert abs(ma - mb) > np.hypot(sa, sb), f"{name}: {ma:.5g} +- {sa:.3g} vs {mb:.5g} +- {sb:.3g}"


def assert_agree(a: dict, b: dict, group: str, name: str):
    (ma, sa), (mb, sb) = median_and_width(a, group, name), median_and_width(b, group, name)
    assert abs(ma - mb) < np.hypot(sa, sb), f"{name}: {ma:.5g} +- {sa:.3g} vs {mb:.5g} +- {sb:.3g}"


def plugin_file(tmp_path, source: str, filename: str = "law.py") -> Path:
    path = tmp_path / filename
    path.write_text(textwrap.dedent(source))
    return path


def one_error_line(err: str) -> str:
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("radwalk: error: "), err
    assert "Traceback" not in err
    return lines[0]


@pytest.fixture(autouse=True)
def _mpl_config(tmp_path, monkeypatch):
    monkeypatch.setenv("MPLCONFIGDIR", str(tmp_path / "mpl"))


@pytest.fixture(scope="module")
def example_installed():
    """Fails (not skips) when the example package is missing or stale."""
    ours = [ep for ep in entry_points(group="radwalk.plugins") if ep.value == EXAMPLE_MODULE]
    if not ours:
        pytest.fail(f"the example plugin {EXAMPLE} is not installed in this environment: run `make test` "
                    f"(which installs it), or `pip install ./examples/opacity_plugin`", pytrace=False)
    installed = Path(ours[0].load().__file__).read_text()
    if installed != (EXAMPLE / f"{EXAMPLE_MODULE}.py").read_text():
        pytest.fail(f"the installed copy of {EXAMPLE_MODULE} differs from {EXAMPLE}: reinstall it with "
                    f"`pip install ./examples/opacity_plugin`", pytrace=False)
    return ours[0]


@pytest.fixture(scope="module")
def default_fit():
    return fit("combined")


@pytest.fixture(scope="module")
def example_fit(example_installed):
    return fit(LAW)


@pytest.fixture
def copy_file(tmp_path):
    """The example law as a single file under another name."""
    source = (EXAMPLE / f"{EXAMPLE_MODULE}.py").read_text()
    assert f'name = "{LAW}"' in source
    return plugin_file(tmp_path, source.replace(f'name = "{LAW}"', f'name = "{COPY}"'), "bent_copy.py")


# -- the installed example ---------------------------------------------------------------
def test_example_is_found_through_its_entry_point(example_installed, capsys):
    entry = Registry().entries["opacity"][LAW]
    assert entry.source.startswith("entry point bent_power (radwalk-bent-power ")
    code, out, _ = run(capsys, "plugins")
    assert code == 0
    block = out[out.index(f"  {LAW} "):].split("\n\n")[0]
    assert f"from: {entry.source}" in block
    for name in ("kappa_bend [cm^2/g]", "T_bend [K]", "rho_slope", "cool_slope", "hot_slope"):
        assert name in block


def test_example_passes_check_plugin(example_installed, tmp_path, capsys):
    (report,) = check_target(LAW)
    assert report.passed, report.format_table()
    png = tmp_path / "bent.png"
    code, out, _ = run(capsys, "check-plugin", LAW, "--map", png)
    assert code == 0 and out.rstrip().endswith("PASS")
    assert f"log-kappa map: {png}" in out
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_example_changes_the_fitted_mass_and_diffusion_time(default_fit, example_fit):
    assert default_fit["opacity"] == "combined" and example_fit["opacity"] == LAW
    assert_changed(default_fit, example_fit, "parameters", "mass")
    assert_changed(default_fit, example_fit, "derived", "diffusion_time")


# -- the guide shows tested code ---------------------------------------------------------------
GUIDE = ROOT / "docs" / "plugins.md"


def guide_code_after(marker: str) -> str:
    """The first ```python block after ``marker`` in docs/plugins.md."""
    text = GUIDE.read_text()
    start = text.index("```python\n", text.index(marker)) + len("```python\n")
    return text[start:text.index("```\n", start)]


def test_guide_shows_the_example_module_verbatim():
    assert guide_code_after("## 4. The worked example") == (EXAMPLE / f"{EXAMPLE_MODULE}.py").read_text()


def test_guide_example_of_the_other_stages_passes_check_plugin(tmp_path):
    path = plugin_file(tmp_path, guide_code_after("may provide all three"), "my_stages.py")
    reports = check_target(str(path), entry_points=False)
    assert [(r.stage, r.component) for r in reports] == [
        ("profile", "polytrope-1.5"), ("relation", "scaled-sun"), ("likelihood", "laplace")]
    for report in reports:
        assert report.passed, report.format_table()


# -- the same law as a single file ---------------------------------------------------------
def test_single_file_plugin_is_listed_and_checked(copy_file, capsys):
    code, out, _ = run(capsys, "plugins", "--json", "--plugin", copy_file)
    assert code == 0
    ours = [c for c in json.loads(out)["opacity"] if c["name"] == COPY]
    assert ours and ours[0]["source"] == f"file {copy_file.resolve()}"
    reports = check_target(str(copy_file))
    assert [r.component for r in reports] == [COPY] and reports[0].passed, reports[0].format_table()
    code, out, _ = run(capsys, "check-plugin", copy_file, "--no-map")
    assert code == 0 and f"opacity component '{COPY}' (file {copy_file.resolve()})" in out


def test_single_file_plugin_changes_the_fit_in_a_comparison(copy_file, tmp_path, capsys, example_fit):
    config = tmp_path / "fast.toml"
    config.write_text(FAST_TOML)
    code, out, err = run(capsys, "fit", *FIT_ARGS, "--plugin", copy_file, "--opacity", f"{COPY},combined",
                         "--config", config, "--json", "--out", tmp_path / "out")
    assert code == 0, err
    doc = json.loads(out)
    comparison = doc["comparison"]
    assert doc["opacity"] == COPY and list(comparison) == [COPY, "combined"]
    assert_changed(comparison["combined"], comparison[COPY], "parameters", "mass")
    assert_changed(comparison["combined"], comparison[COPY], "derived", "diffusion_time")
    # the same law, star, seed and sampler as the installed example (and fitted first, so with the
    # same random streams): the same posterior
    for group, name in (("parameters", "mass"), ("derived", "diffusion_time")):
        assert comparison[COPY][group][name]["p50"] == pytest.approx(example_fit[group][name]["p50"], rel=1e-9)


# -- tabulated against the law it was built from -------------------------------------------
KRAMERS_PLUS_SCATTERING = '''
    from radwalk.host.hookspecs import hookimpl
    from radwalk.host.params import Validity
    from radwalk.plugins.opacity import ElectronScattering, Kramers


    class KramersPlusScattering:
        name = "kramers-plus-scattering"
        description = "electron scattering + Kramers bound-free and free-free, default parameters"
        params = ()
        validity = Validity(T=(1e4, 1e8), rho=(1e-10, 1e3), Z=(0.0, 0.1))

        def __init__(self):
            self.parts = (ElectronScattering(), Kramers())

        def kappa(self, rho, T, X, Z):
            return sum(part.kappa(rho, T, X, Z) for part in self.parts)


    @hookimpl
    def radwalk_opacities():
        return [KramersPlusScattering()]
'''
# The table's grid: 0.1 dex over the Kramers law's density and temperature range, and
# compositions spanning the relation grid's X and Z (linear in kappa between them is exact for
# electron scattering and Kramers up to the X dependence of the guillotine factor).
TABLE_LOG_RHO = np.round(np.arange(-10.0, 3.0 + 1e-9, 0.1), 6)
TABLE_LOG_T = np.round(np.arange(4.0, 8.0 + 1e-9, 0.1), 6)
TABLE_X = (0.4, 0.55, 0.7, 0.85)
TABLE_Z = (1e-4, 0.05, 0.1)


def write_table(path: Path, law) -> Path:
    """log10 kappa of ``law`` in the text layout of radwalk.plugins.tabulated."""
    lines = ["# electron scattering + Kramers, written by tests/test_custom_opacity.py",
             "# axes: log_rho log_T", "# units: g/cm^3 K cm^2/g"]
    for X in TABLE_X:
        for Z in TABLE_Z:
            lines += [f"# X: {X}", f"# Z: {Z}", "       " + " ".join(f"{t:.2f}" for t in TABLE_LOG_T)]
            for r in TABLE_LOG_RHO:
                kappa = law.kappa(10.0**r, 10.0**TABLE_LOG_T, X, Z)
                lines.append(f"{r:6.2f} " + " ".join(f"{v:.9f}" for v in np.log10(kappa)))
    path.write_text("\n".join(lines) + "\n")
    return path


def test_tabulated_fit_agrees_with_the_analytic_law(tmp_path):
    law_file = plugin_file(tmp_path, KRAMERS_PLUS_SCATTERING, "kramers_plus_scattering.py")
    analytic = Registry(plugin_files=[law_file]).entries["opacity"]["kramers-plus-scattering"]
    table = write_table(tmp_path / "kramers_plus_scattering.txt", analytic.component)
    # the table against the law at points between its nodes, inside both ranges
    rng = np.random.default_rng(5)
    rho = 10.0 ** rng.uniform(-9.9, 2.9, (4, 2000))
    T = 10.0 ** rng.uniform(4.05, 7.95, (4, 2000))
    X, Z = rng.uniform(0.4, 0.85, (4, 1)), rng.uniform(1e-4, 0.1, (4, 1))
    tabulated = Registry().get("opacity", "tabulated").configure(table=str(table))
    ratio = tabulated.kappa(rho, T, X, Z) / analytic.component.kappa(rho, T, X, Z)
    # 1 %: the stated bound (docs/tabulated_opacity.md) is 0.7 % next to the guillotine kink
    assert np.max(np.abs(ratio - 1.0)) < 0.01

    reference = fit("kramers-plus-scattering", plugins=[law_file])
    with warnings.catch_warnings():
        # the star's outermost layers lie below the table's 1e4 K and are clipped to it
        warnings.simplefilter("ignore", ValidityWarning)
        from_table = fit("tabulated", settings={"table": str(table)})
    assert any("clipped to the grid edge" in w for w in from_table["warnings"])
    assert_agree(reference, from_table, "parameters", "mass")
    assert_agree(reference, from_table, "derived", "diffusion_time")


# -- bad inputs: one clear line from `radwalk fit` -------------------------------------------
HEADER = """\
import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity
from radwalk.plugins.opacity import kramers_bound_free, kramers_free_free, thomson
"""

BAD_LAW = HEADER + """

class Law:
    name = "{name}"
    description = "electron scattering + Kramers with a defect: {what}"
    params = (Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity"),)
    validity = Validity(T=(1e4, 1e8), rho=(1e-10, 1e3), Z=(0.0, 0.1))

    def kappa(self, rho, T, X, Z, scale=1.0):
        base = scale * (thomson(X) + kramers_bound_free(rho, T, X, Z) + kramers_free_free(rho, T, X, Z))
        return {result}


@hookimpl
def radwalk_opacities():
    return [Law()]
"""

GOOD_RESULT = "base"


def bad_law(tmp_path, name="defective", what="none", result=GOOD_RESULT, edit=None) -> Path:
    source = BAD_LAW.format(name=name, what=what, result=result)
    if edit:
        source = edit(source)
    return plugin_file(tmp_path, source, "defective.py")


def fit_cli(capsys, tmp_path, *extra):
    config = tmp_path / "fast.toml"
    config.write_text(FAST_TOML)
    return run(capsys, "fit", *FIT_ARGS, "--config", config, "--out", tmp_path / "out", *extra)


def test_syntax_error_is_named_by_file_and_line(tmp_path, capsys):
    path = bad_law(tmp_path, edit=lambda s: s.replace("def kappa(self,", "def kappa(self,,"))
    lineno = 1 + path.read_text().splitlines().index(
        next(ln for ln in path.read_text().splitlines() if "def kappa(self,," in ln))
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", "defective")
    line = one_error_line(err)
    assert code == 2
    assert f"plugin file {path.resolve()} has a syntax error at line {lineno}" in line


def test_failing_import_is_named_by_file_and_line(tmp_path, capsys):
    path = bad_law(tmp_path, edit=lambda s: s.replace("import numpy as np", "import numpy as np\n"
                                                      "import radwalk_no_such_package_xyz"))
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", "defective")
    line = one_error_line(err)
    assert code == 2
    assert f"plugin file {path.resolve()} failed to import at line 2: ModuleNotFoundError" in line
    assert "radwalk_no_such_package_xyz" in line


@pytest.mark.parametrize("edit, missing", [
    (lambda s: s.replace("def kappa(self,", "def opacity(self,"), "missing method kappa()"),
    (lambda s: s.replace("    validity = Validity(T=(1e4, 1e8), rho=(1e-10, 1e3), Z=(0.0, 0.1))\n", ""),
     "missing validity"),
    (lambda s: s.replace('    params = (Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity"),)\n', ""),
     "missing params"),
])
def test_missing_method_or_declaration_is_named(tmp_path, capsys, edit, missing):
    path = bad_law(tmp_path, edit=edit)
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", "defective")
    line = one_error_line(err)
    assert code == 2
    assert f"file {path.resolve()}: opacity component 'defective' is {missing}" in line


# A defect over a part of the law's own range that a Sun-like star's interior reaches.
DEFECTS = {
    "nan": ("NaN above 1e6 K", "np.where(T > 1e6, np.nan, base)", ("finite", "first at rho=")),
    "zero": ("zero above 1 g/cm^3", "np.where(rho > 1.0, 0.0, base)", ("positive", "first at rho=")),
    "negative": ("negative above 1 g/cm^3", "np.where(rho > 1.0, -base, base)", ("positive", "first at rho=")),
    "shape": ("flattened", "np.ravel(base)", ("shape", "returned shape [")),
}
# what the one line from `radwalk fit` must say besides the law's name
DEFECT_WORDS = {"nan": "nan", "zero": "positive", "negative": "positive", "shape": "shape"}


@pytest.mark.parametrize("defect", list(DEFECTS))
def test_bad_values_are_named_by_check_plugin(tmp_path, capsys, defect):
    what, result, (check, detail) = DEFECTS[defect]
    path = bad_law(tmp_path, name=f"bad-{defect}", what=what, result=result)
    code, out, _ = run(capsys, "check-plugin", path, "--no-map")
    assert code == 1 and out.rstrip().endswith("FAIL")
    lines = out.splitlines()
    assert lines[0] == f"opacity component 'bad-{defect}' (file {path.resolve()})"
    assert lines[1].split() == ["check", "result", "detail"]
    rows = {ln.split()[0]: ln for ln in lines[3:] if ln.startswith("  ") and not ln.startswith("   ")}
    for passed in ("declarations", "params", "validity", "call"):
        assert rows[passed].split()[1] == "pass"
    assert rows[check].split()[1] == "FAIL" and detail in rows[check]


@pytest.mark.parametrize("defect", list(DEFECTS))
def test_bad_values_stop_radwalk_fit_naming_the_law(tmp_path, capsys, defect):
    what, result, _ = DEFECTS[defect]
    path = bad_law(tmp_path, name=f"bad-{defect}", what=what, result=result)
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", f"bad-{defect}")
    line = one_error_line(err)
    assert code == 2
    assert f"'bad-{defect}'" in line and DEFECT_WORDS[defect] in line.lower()


def test_name_clash_with_a_built_in_names_both_sources(tmp_path, capsys):
    path = bad_law(tmp_path, name="kramers")
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", "kramers")
    line = one_error_line(err)
    assert code == 2
    assert f"duplicate opacity component name 'kramers': from built-in and from file {path.resolve()}" in line


def test_name_clash_with_an_installed_plugin_names_both_sources(example_installed, tmp_path, capsys):
    path = bad_law(tmp_path, name=LAW)
    code, _, err = fit_cli(capsys, tmp_path, "--plugin", path, "--opacity", LAW)
    line = one_error_line(err)
    assert code == 2
    assert (f"duplicate opacity component name '{LAW}': from entry point bent_power (radwalk-bent-power "
            in line and f"and from file {path.resolve()}" in line)


# -- bad tables through `radwalk fit --opacity tabulated --set table=FILE` -------------------------
def small_table(edit=None) -> str:
    """A 5 x 5 text table of one composition, optionally edited line by line."""
    lines = ["# axes: log_rho log_T", "# units: g/cm^3 K cm^2/g", "# X: 0.7", "# Z: 0.02",
             "      4.0  5.0  6.0  7.0  8.0"]
    for r in (-4.0, -3.0, -2.0, -1.0, 0.0):
        lines.append(f"{r:5.1f} " + " ".join(f"{1.0 + r - 0.5 * t:5.2f}" for t in (4, 5, 6, 7, 8)))
    return "\n".join(edit(lines) if edit else lines) + "\n"


TABLE_DEFECTS = {
    "ragged": (lambda ls: ls[:7] + [ls[7].rsplit(None, 1)[0]] + ls[8:],
               "line 8: ragged grid: 4 log_kappa values after log_rho, but the log_T row (line 5) has 5"),
    "non-monotonic": (lambda ls: ls[:4] + ["      4.0  6.0  5.0  7.0  8.0"] + ls[5:],
                      "line 5: log_T values are not strictly increasing (6 then 5)"),
    "missing header": (lambda ls: ls[1:], "missing header line '# axes: log_rho log_T'"),
    "wrong units": (lambda ls: [ls[0], "# units: g/cm^3 K cm^2"] + ls[2:],
                    "line 2: kappa has unit cm2, which is not a unit of"),
}


@pytest.mark.parametrize("defect", list(TABLE_DEFECTS))
def test_bad_table_stops_radwalk_fit_with_one_line(tmp_path, capsys, defect):
    edit, message = TABLE_DEFECTS[defect]
    good = tmp_path / "good.txt"
    good.write_text(small_table())
    Registry().get("opacity", "tabulated").configure(table=str(good))  # the unedited table reads
    path = tmp_path / "bad.txt"
    path.write_text(small_table(edit))
    code, _, err = fit_cli(capsys, tmp_path, "--opacity", "tabulated", "--set", f"table={path}")
    line = one_error_line(err)
    assert code == 2
    assert line.startswith(f"radwalk: error: opacity table {path}: ") and message in line
