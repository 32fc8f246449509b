"""Contract tests over every registered component of every stage (issue 2).

The built-in checker (radwalk.host.contracts) runs each component's stage
contract: declarations, shapes, broadcasting with a leading sample axis,
finiteness, positivity, no warnings inside the declared validity range.
"""

import numpy as np
import pytest

from radwalk.host.contracts import check_component
from radwalk.host.registry import Registry
from radwalk.host.stages import STAGES

_REG = Registry()
# Components that need an option before they can run are checked below, given it: the tabulated law its
# table; the track-grid stages a grid file (the default grid ships with the package; until then the first use
# builds it, minutes of CPU, so the contract is checked on the small session grid instead).
NEEDS_OPTIONS = {"tabulated", "track-grid"}
ENTRIES = [e for s in STAGES for e in _REG.entries[s].values() if e.name not in NEEDS_OPTIONS]


@pytest.mark.parametrize("entry", ENTRIES, ids=[f"{e.stage}:{e.name}" for e in ENTRIES])
def test_component_meets_its_stage_contract(entry):
    report = check_component(entry, registry=_REG)
    assert report.passed, report.format_table()


def test_tabulated_meets_the_contract_once_given_a_table(tmp_path):
    from astropy.table import Table

    from radwalk.plugins.opacity import ElectronScattering, Kramers

    lr, lt = np.meshgrid(np.arange(-8, 2.01, 0.25), np.arange(4, 8.01, 0.1), indexing="ij")
    rows = []
    for X in (0.6, 0.75):
        for Z in (0.01, 0.03):
            kap = ElectronScattering().kappa(10**lr, 10**lt, X, Z) + Kramers().kappa(10**lr, 10**lt, X, Z)
            rows.append((np.full(lr.size, X), np.full(lr.size, Z), lr.ravel(), lt.ravel(), np.log10(kap).ravel()))
    cols = [np.concatenate(c) for c in zip(*rows)]
    t = Table(cols, names=("X", "Z", "log_rho", "log_T", "log_kappa"))
    t["log_rho"].unit = "dex(g / cm3)"
    t["log_T"].unit = "dex(K)"
    t["log_kappa"].unit = "dex(cm2 / g)"
    path = tmp_path / "table.ecsv"
    t.write(path)
    report = check_component(_REG.entries["opacity"]["tabulated"], options={"table": str(path)}, registry=_REG)
    assert report.passed, report.format_table()


@pytest.mark.parametrize("stage", ["relation", "profile"])
def test_track_grid_stages_meet_the_contract_given_a_grid(stage, small_track_grid):
    report = check_component(_REG.entries[stage]["track-grid"], options={"grid": small_track_grid}, registry=_REG)
    assert report.passed, report.format_table()
    # they declare the age's support, and its check ran
    assert any(row.check == "support" and row.passed for row in report.rows), report.format_table()


def test_every_stage_has_its_builtins():
    names = {s: set(_REG.names(s)) for s in STAGES}
    assert {"polytrope", "eddington-standard"} <= names["profile"]
    assert {"electron-scattering", "kramers", "h-minus", "combined", "tabulated"} <= names["opacity"]
    assert {"homology", "eddington", "solved", "track-grid"} <= names["relation"]
    assert {"solved", "track-grid"} <= names["profile"]
    assert {"gaussian", "student-t"} <= names["likelihood"]


def test_likelihood_skips_missing_observables_and_never_nan(registry):
    from radwalk.host.components import Observations

    lik = registry.get("likelihood", "gaussian")
    pred = {"radius": np.array([1.0, np.nan, 2.0]), "luminosity": np.array([1.0, 1.0, 1.0]),
            "teff": np.array([5000.0, 5000.0, np.nan])}
    obs = Observations({"radius": 1.0, "luminosity": np.nan, "teff": np.nan},
                       {"radius": 0.1, "luminosity": np.nan, "teff": np.nan})
    ll = lik.loglike(pred, obs)
    assert ll[0] > ll[2] and ll[1] == -np.inf and not np.isnan(ll).any()
    # the floor adds in quadrature: a tiny error cannot make sigma smaller than floor x value
    obs2 = Observations({"radius": 1.0, "luminosity": np.nan, "teff": np.nan},
                        {"radius": 1e-9, "luminosity": np.nan, "teff": np.nan})
    ll2 = lik.loglike({k: v[:1] for k, v in pred.items()} | {"radius": np.array([1.03])}, obs2, floor_radius=0.03)
    assert ll2[0] == pytest.approx(-0.5 - np.log(0.03), rel=1e-6)
