"""The plugin checker: targets, the checks of each contract and the report table (the map: tests/report)."""

from __future__ import annotations

import sys
import textwrap

import numpy as np
import pytest

from radwalk.errors import ConfigError, PluginError
from radwalk.host.contracts import (
    JUMP_FACTOR,
    CheckReport,
    check_component,
    check_target,
    resolve_target,
)
from radwalk.host.registry import Registry

ANALYTIC = ("electron-scattering", "kramers", "h-minus", "combined")

# A plugin file: header, then a component class whose kappa body is filled in per test.
HEADER = """\
import warnings

import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity
"""

LAW = """
class Law:
    name = "{name}"
    description = "a test opacity law"
    params = (Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity"),)
    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))

    def kappa(self, rho, T, X, Z, scale=1.0):
        rho, T, X, Z, scale = (np.asarray(v, dtype=float) for v in (rho, T, X, Z, scale))
{body}


@hookimpl
def radwalk_opacities():
    return [Law()]
"""

GOOD_BODY = "return scale * 0.2 * (1 + X) * (1 + 1e23 * rho * T**-3.5)"


def plugin(tmp_path, body=GOOD_BODY, name="test-law", text=None, filename="myplugin.py"):
    path = tmp_path / filename
    source = text if text is not None else HEADER + LAW.format(
        name=name, body=textwrap.indent(textwrap.dedent(body), " " * 8))
    path.write_text(source)
    return str(path)


def only_report(path):
    reports = check_target(path, entry_points=False)
    assert len(reports) == 1
    return reports[0]


@pytest.fixture(scope="module")
def registry():
    return Registry(entry_points=False)


# -- the built-in laws pass ---------------------------------------------------------
@pytest.mark.parametrize("name", ANALYTIC)
def test_built_in_opacity_laws_pass(registry, name):
    report = check_component(registry.entries["opacity"][name], registry=registry)
    assert report.passed, report.format_table()
    checks = [r.check for r in report.rows]
    for check in ("params", "signature", "validity", "call", "shape", "finite", "positive", "broadcasting",
                  "warnings", "smoothness", "units", "star", "speed"):
        assert check in checks
    assert 0 < report.seconds_per_million < 10


def test_tabulated_passes_once_given_a_table(kramers_table):
    (unconfigured,) = check_target("tabulated", entry_points=False)
    assert not unconfigured.passed
    assert "tabulated opacity needs a table: --set table=PATH" in unconfigured.row("call").detail
    (report,) = check_target("tabulated", options={"table": kramers_table}, entry_points=False)
    assert report.passed, report.format_table()
    assert "0.6 <= X <= 0.75" in report.row("validity").detail


def test_other_built_in_stages_are_checked(registry):
    for stage, name in (("relation", "homology"), ("likelihood", "gaussian"), ("profile", "polytrope")):
        report = check_component(registry.entries[stage][name], registry=registry)
        assert report.passed, report.format_table()
        assert report.row("broadcasting").passed


# -- targets --------------------------------------------------------------------------
def test_targets_file_module_and_name(tmp_path, monkeypatch):
    path = plugin(tmp_path)
    reg, entries = resolve_target(path, entry_points=False)
    assert [(e.stage, e.name) for e in entries] == [("opacity", "test-law")]
    assert entries[0].source.startswith("file ") and "kramers" in reg.names("opacity")

    plugin(tmp_path, name="module-law", filename="radwalk_check_mod_a.py")
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.delitem(sys.modules, "radwalk_check_mod_a", raising=False)
    _, entries = resolve_target("radwalk_check_mod_a", entry_points=False)
    assert [(e.name, e.source) for e in entries] == [("module-law", "module radwalk_check_mod_a")]

    _, entries = resolve_target("kramers", entry_points=False)
    assert [(e.stage, e.source) for e in entries] == [("opacity", "built-in")]
    _, entries = resolve_target("radwalk.plugins.likelihoods", entry_points=False)
    assert sorted(e.name for e in entries) == ["gaussian", "student-t"]

    with pytest.raises(ConfigError, match=r"'kramer' is not a plugin file.*did you mean 'kramers'"):
        resolve_target("kramer", entry_points=False)


def test_a_good_plugin_file_passes(tmp_path):
    report = only_report(plugin(tmp_path))
    assert report.passed, report.format_table()
    assert report.stage == "opacity" and report.component == "test-law"


# -- bad plugin files ------------------------------------------------------------------
def test_syntax_error_names_file_and_line(tmp_path):
    path = plugin(tmp_path, text=HEADER + "\ndef broken(:\n    pass\n")
    with pytest.raises(PluginError, match=rf"plugin file {path} has a syntax error at line 8"):
        resolve_target(path, entry_points=False)
    report = only_report(path)
    assert not report.passed and report.rows[0].check == "load"
    assert f"{path} has a syntax error at line 8" in report.rows[0].detail


def test_failing_import_names_file_and_line(tmp_path):
    path = plugin(tmp_path, text=HEADER + "import radwalk_no_such_module_xyz\n")
    report = only_report(path)
    assert report.rows[0].check == "load" and not report.rows[0].passed
    assert f"{path} failed to import at line 7: ModuleNotFoundError" in report.rows[0].detail


@pytest.mark.parametrize("missing, message", [("kappa", "missing method kappa()"),
                                              ("validity", "missing validity")])
def test_component_missing_a_member(tmp_path, missing, message):
    source = HEADER + LAW.format(name="incomplete", body="        return 0.34 + 0 * rho * T")
    if missing == "kappa":
        source = source.replace("def kappa(", "def kapa(")
    else:
        source = source.replace("    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))\n", "")
    path = plugin(tmp_path, text=source)
    report = only_report(path)
    assert report.rows[0].check == "load" and not report.passed
    assert "opacity component 'incomplete' is" in report.rows[0].detail
    assert message in report.rows[0].detail


def test_nan_in_part_of_the_range(tmp_path):
    report = only_report(plugin(tmp_path, body="return np.where(T > 1e6, np.nan, 0.34 + 0 * rho * X)"))
    row = report.row("finite")
    assert not row.passed and report.row("shape").passed
    # first bad point: the first composition, lowest density, first T above 1e6 K on the grid
    T_first = np.geomspace(1e4, 1e8, 81)[np.geomspace(1e4, 1e8, 81) > 1e6][0]
    assert f"first at rho=1e-08 g/cm^3, T={T_first:.6g} K, X=0.4, Z=0.02005: kappa=nan" in row.detail


def test_zero_or_negative_values(tmp_path):
    body = "return 0.34 * (1 + X) * np.where(rho > 1.0, -1.0, 1.0) + 0 * T"
    report = only_report(plugin(tmp_path, body=body))
    row = report.row("positive")
    assert not row.passed and report.row("finite").passed
    assert "values <= 0; first at rho=1.25893 g/cm^3, T=10000 K" in row.detail
    assert "kappa=-0.476" in row.detail


def test_wrong_shape(tmp_path):
    report = only_report(plugin(tmp_path, body="return np.ravel(0.34 + 0 * rho * T * X)"))
    row = report.row("shape")
    assert not row.passed
    assert "returned shape [" in row.detail and "expected [3, " in row.detail


def test_broadcasting_over_samples(tmp_path):
    # mixes the samples: the mean X of all of them
    report = only_report(plugin(tmp_path, body="return 0.2 * (1 + np.mean(X)) + 0 * rho * T"))
    row = report.row("broadcasting")
    # sample 0 has the middle X, which is the mean; sample 1 has X = 0
    assert not row.passed and row.detail.startswith("sample 1 alone gives 0.2 but 0.28 in the [n, g] call")


def test_jump_between_neighbours(tmp_path):
    report = only_report(plugin(tmp_path, body="return np.where(T > 1e6, 50.0, 0.34) + 0 * rho * X"))
    row = report.row("smoothness")
    assert not row.passed and JUMP_FACTOR == 10
    assert "jumps by a factor 147" in row.detail and "kappa=0.34 and" in row.detail


def test_warning_inside_the_range(tmp_path):
    body = """
    warnings.warn("trouble ahead")
    return 0.34 + 0 * rho * T * X
    """
    row = only_report(plugin(tmp_path, body=body)).row("warnings")
    assert not row.passed and "UserWarning: trouble ahead" in row.detail


def test_name_clash_with_a_built_in(tmp_path):
    path = plugin(tmp_path, name="kramers")
    with pytest.raises(PluginError) as info:
        resolve_target(path, entry_points=False)
    text = str(info.value)
    assert "duplicate opacity component name 'kramers'" in text
    assert "from built-in and from file" in text and path in text


def test_bad_param_declaration(tmp_path):
    source = HEADER + LAW.format(name="bad-param", body=f"        {GOOD_BODY}").replace(
        'Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity")',
        'Param("scale", "", 0.5, 2.0, 3.0, "multiplies the opacity")')
    row = only_report(plugin(tmp_path, text=source)).row("params")
    assert not row.passed and "scale: default 3 is outside [0.5, 2]" in row.detail


# -- the report --------------------------------------------------------------------------
def test_format_table_is_aligned(tmp_path):
    report = only_report(plugin(tmp_path, body="return np.where(T > 1e6, np.nan, 0.34 + 0 * rho * X)"))
    lines = report.format_table().splitlines()
    assert lines[0] == f"opacity component 'test-law' ({report.source})"
    body = lines[3:-1]
    assert len(body) == len(report.rows)
    col = lines[1].index("result")
    for line, row in zip(body, report.rows):
        assert line[col:col + 4] == ("pass" if row.passed else "FAIL")
        assert line.index(row.detail) == lines[1].index("detail")
    assert lines[-1] == f"  {len(report.failed())} of {len(report.rows)} checks failed"
    empty = CheckReport("x", "opacity", "nowhere")
    assert not empty.passed

