"""Components get read-only inputs: a law that writes into them is refused by name, never silently wrong."""

import textwrap

import numpy as np
import pytest

from radwalk.api import model
from radwalk.errors import PluginError
from radwalk.host.components import BoundOpacity
from radwalk.host.contracts import check_component
from radwalk.host.registry import Registry

PLUGIN = textwrap.dedent('''\
    from radwalk.host.hookspecs import hookimpl
    from radwalk.plugins.opacity import Combined


    class InPlace(Combined):
        """The combined law, but it scales the density it was given in place (a test plugin)."""

        name = "test-in-place"
        description = "combined opacity that writes into rho (test plugin)"

        def kappa(self, rho, T, X, Z, **params):
            k = super().kappa(rho, T, X, Z, **params)
            rho *= 1.5
            return k


    @hookimpl
    def radwalk_opacities():
        return [InPlace()]
    ''')


@pytest.fixture
def plugin(tmp_path):
    path = tmp_path / "in_place.py"
    path.write_text(PLUGIN)
    return str(path)


def test_checker_names_the_input_a_law_writes_into(plugin):
    entry = Registry(plugin_files=(plugin,)).entries["opacity"]["test-in-place"]
    rows = {r.check: r for r in check_component(entry).rows}
    assert not rows["inputs"].passed and "input rho" in rows["inputs"].detail
    honest = Registry().entries["opacity"]["combined"]
    assert {r.check: r for r in check_component(honest).rows}["inputs"].passed


def test_law_writing_into_its_inputs_is_refused_and_the_profile_is_untouched(plugin):
    law = Registry(plugin_files=(plugin,)).entries["opacity"]["test-in-place"].component
    rho = np.geomspace(1e-6, 100.0, 8)[None, :]
    T = np.geomspace(1e4, 1.5e7, 8)[None, :]
    before = rho.copy()
    with pytest.raises(PluginError, match="test-in-place.*writes into its input"):
        BoundOpacity(law)(rho, T, np.array([0.7]), np.array([0.02]))
    assert np.array_equal(rho, before)


def test_model_with_a_law_writing_into_its_inputs_is_refused(plugin):
    # Before: the model ran and reported a central density 1.5x too high (62 instead of 41 g/cm^3 in the sweep).
    with pytest.raises(PluginError, match="test-in-place"):
        model(1.0, profile="polytrope", opacity="test-in-place", relation="homology", plugins=[plugin])
