"""The contract as test cases (contract_cases) and the per-check functions behind it."""

from __future__ import annotations

import textwrap
import unittest

import numpy as np
import pytest

from radwalk.host import contracts
from radwalk.host.contracts import (
    CHECKS,
    CheckRow,
    ContractFailure,
    Subject,
    check_component,
    check_opacity_finite,
    check_opacity_shape,
    contract_cases,
)
from radwalk.host.params import Validity
from radwalk.host.registry import Registry

pytest_plugins = ["pytester"]

PLUGIN = '''
import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Param, Validity


class Law:
    name = "{name}"
    description = "a test opacity law"
    params = (Param("scale", "", 0.5, 2.0, 1.0, "multiplies the opacity"),)
    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))

    def kappa(self, rho, T, X, Z, scale=1.0):
        rho, T, X, Z, scale = (np.asarray(v, dtype=float) for v in (rho, T, X, Z, scale))
        return {body}


@hookimpl
def radwalk_opacities():
    return [Law()]
'''
GOOD = "scale * 0.2 * (1 + X) * (1 + 1e23 * rho * T**-3.5)"
NAN_ABOVE_1E6_K = "np.where(T > 1e6, np.nan, 0.34 + 0 * rho * X)"


def plugin(tmp_path, body=GOOD, name="test-law", filename="law.py") -> str:
    path = tmp_path / filename
    path.write_text(PLUGIN.format(name=name, body=body))
    return str(path)


class Counting:
    """A valid opacity law that counts its calls on the [n, g] grid."""

    name = "counting"
    description = "electron scattering, counting its grid calls"
    params = ()
    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))

    def __init__(self):
        self.grid_calls = 0

    def kappa(self, rho, T, X, Z):
        if np.ndim(rho) == 2:
            self.grid_calls += 1
        return 0.2 * (1 + np.asarray(X, dtype=float)) + 0 * np.asarray(rho) * np.asarray(T)


def outcome(case):
    """'pass', 'fail: <message>' or 'skip: <reason>'."""
    try:
        case.run()
    except ContractFailure as exc:
        return f"fail: {exc}"
    except unittest.SkipTest as exc:
        return f"skip: {exc}"
    return "pass"


def test_a_good_plugin_gives_one_passing_case_per_check(tmp_path):
    cases = contract_cases(plugin(tmp_path))
    names = [c.name for c in CHECKS["opacity"] if c.name not in ("configure", "options")]
    assert [str(c) for c in cases] == [f"opacity:test-law:{n}" for n in names]
    assert all(outcome(c) == "pass" for c in cases)
    # the same rows as check_component, from the same functions
    report = check_component(cases[0].subject)
    assert [r.check for r in report.rows] == names and report.passed


def test_a_broken_law_fails_the_case_named_after_the_check(tmp_path):
    path = plugin(tmp_path, body=NAN_ABOVE_1E6_K, name="nan-law")
    results = {str(c): outcome(c) for c in contract_cases(path)}
    failed = {k: v for k, v in results.items() if v != "pass"}
    # NaN above 1e6 K is NaN in every star's core too
    assert list(failed) == ["opacity:nan-law:finite", "opacity:nan-law:star"]
    message = failed["opacity:nan-law:finite"]
    assert message.startswith(f"fail: opacity component 'nan-law' (file {tmp_path / 'law.py'}) fails the "
                              f"'finite' check: ")
    assert "values not finite; first at rho=1e-08 g/cm^3" in message and "kappa=nan" in message


def test_cases_after_a_failed_call_are_skipped_naming_it(tmp_path):
    path = plugin(tmp_path, body='(_ for _ in ()).throw(ValueError("no kappa here"))', name="raising")
    results = {str(c).split(":")[-1]: outcome(c) for c in contract_cases(path)}
    assert results["call"].startswith("fail: ") and "raised ValueError: no kappa here" in results["call"]
    for name in ("shape", "finite", "positive", "broadcasting", "warnings", "smoothness", "units", "star", "speed"):
        assert results[name] == f"skip: {name!r} not reached: 'call' failed"
    assert results["declarations"] == results["params"] == results["validity"] == "pass"


def test_a_target_that_does_not_load_is_one_failing_case(tmp_path):
    path = tmp_path / "broken.py"
    path.write_text("def broken(:\n")
    (case,) = contract_cases(str(path))
    assert str(case) == f"{path}:load"
    with pytest.raises(ContractFailure, match=f"{path} did not load: plugin file .* has a syntax error at line 1"):
        case.run()


def test_targets_component_module_and_lists(tmp_path, monkeypatch):
    law = Counting()
    assert [str(c) for c in contract_cases(law, checks=("call", "finite"))] == [
        "opacity:counting:call", "opacity:counting:finite"]
    plugin(tmp_path, name="module-law", filename="radwalk_cases_mod_b.py")
    monkeypatch.syspath_prepend(str(tmp_path))
    import radwalk_cases_mod_b

    ids = [str(c) for c in contract_cases([radwalk_cases_mod_b, "kramers"], checks=("call",))]
    assert ids == ["opacity:module-law:call", "opacity:kramers:call"]
    relation = Registry(entry_points=False).entries["relation"]["homology"]
    ids = [str(c) for c in contract_cases(relation)]
    # configure and options apply only with options, support only to a component that declares one
    assert ids == [f"relation:homology:{c.name}" for c in CHECKS["relation"]
                   if c.name not in ("configure", "options", "support")]


def test_options_give_a_configure_case(tmp_path):
    (configure, call) = contract_cases("tabulated", options={"table": str(tmp_path / "missing.txt")},
                                       checks=("configure", "call"))
    assert (str(configure), str(call)) == ("opacity:tabulated:configure", "opacity:tabulated:call")
    assert "missing.txt: file does not exist" in outcome(configure)
    assert outcome(call) == "skip: 'call' not reached: 'configure' failed"


def test_the_cases_of_a_component_share_one_grid_call():
    law = Counting()
    cases = contract_cases(law, checks=("call", "shape", "finite", "positive", "smoothness"))
    assert [outcome(c) for c in cases] == ["pass"] * 5
    assert law.grid_calls == 1


def test_check_functions_take_a_bare_component():
    law = Counting()
    row = check_opacity_finite(law)
    assert isinstance(row, CheckRow) and row.check == "finite" and row.passed

    class Flat(Counting):
        name = "flat"

        def kappa(self, rho, T, X, Z):
            return np.ravel(super().kappa(rho, T, X, Z))

    row = check_opacity_shape(Flat())
    assert not row.passed and "expected [3, " in row.detail
    assert check_opacity_finite(Flat()) is None  # not reached: no [n, g] values to judge
    with pytest.raises(TypeError, match="grid_points cannot be given with a Subject"):
        Subject.of(Subject(law), grid_points=5)


def test_the_public_surface():
    for name in contracts.__all__:
        assert hasattr(contracts, name), name
    # every check of every stage is a public function
    for group in CHECKS.values():
        for check in group:
            assert check.function.__name__ in contracts.__all__
            assert check.summary, check.name
    assert not hasattr(contracts, "plot_log_kappa_map")  # the host does not draw


def test_in_a_plugin_authors_own_test_suite(pytester, tmp_path):
    good = plugin(tmp_path, name="good-law", filename="good_law.py")
    bad = plugin(tmp_path, body=NAN_ABOVE_1E6_K, name="bad-law", filename="bad_law.py")
    pytester.makepyfile(test_author=textwrap.dedent(f"""
        import pytest
        from radwalk.host.contracts import contract_cases

        @pytest.mark.parametrize("case", contract_cases([{good!r}, {bad!r}]), ids=str)
        def test_contract(case):
            case.run()
    """))
    result = pytester.runpytest("-p", "no:cacheprovider", "-rf")
    # 15 checks per law: declarations, params, signature, validity and the 11 of the opacity stage; the bad law
    # is NaN above 1e6 K, so in every star's core too
    result.assert_outcomes(passed=28, failed=2)
    result.stdout.fnmatch_lines(["*ContractFailure: opacity component 'bad-law' * fails the 'finite' check: *",
                                 "FAILED test_author.py::test_contract[[]opacity:bad-law:finite[]]*"])
    # -k picks a check by name
    result = pytester.runpytest("-p", "no:cacheprovider", "-k", "smoothness")
    result.assert_outcomes(passed=2, deselected=28)
