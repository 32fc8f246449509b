"""The stage table: one list of the four stages, and everything else reading it."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from radwalk.errors import ConfigError
from radwalk.forward.stages import StageSet
from radwalk.host import config, hookspecs
from radwalk.host.contracts import CHECKS
from radwalk.host.registry import Registry
from radwalk.host.stages import BY_NAME, DEFAULTS, HOOKS, STAGE_TABLE, STAGES, stage, stage_of

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def registry():
    return Registry(entry_points=False)


def test_the_table_in_pipeline_order():
    assert STAGES == ("profile", "opacity", "relation", "likelihood")
    assert list(BY_NAME) == list(DEFAULTS) == list(HOOKS) == list(STAGES)
    assert [s.name for s in STAGE_TABLE if not s.forward] == ["likelihood"]


def test_each_hook_is_a_spec_and_each_method_is_in_the_protocol():
    specs = {name for name in dir(hookspecs) if name.startswith("radwalk_")}
    for s in STAGE_TABLE:
        assert s.hook in specs, s
        assert s.method in s.protocol.__dict__, s  # declared by the stage's own protocol
    # every provider hook feeds a stage; the one other spec adds derived quantities
    assert specs - set(HOOKS.values()) == {"radwalk_derived_quantities"}


def test_defaults_are_built_in_components_that_follow_their_protocol(registry):
    for s in STAGE_TABLE:
        entry = registry.entries[s.name][s.default]
        assert entry.source == "built-in"
        assert isinstance(entry.component, s.protocol)
        assert stage_of(entry.component) == s.name


def test_readers_of_the_table(registry):
    # the config's [stages] keys, the stage set's defaults and the contract groups come from the table
    assert config._SECTIONS["stages"] == STAGES
    assert config.RunConfig().opacity_names() == (DEFAULTS["opacity"],)
    built = StageSet.build(registry)
    assert {name: comp.name for name, comp in built.components().items()} == DEFAULTS
    assert list(CHECKS) == list(STAGES)
    with pytest.raises(ConfigError, match=r"unknown stage 'opacities'; stages: profile, opacity"):
        stage("opacities")
    with pytest.raises(ConfigError, match="unknown key \\[stages\\] 'opacities'"):
        config.from_dict({"stages": {"opacities": "kramers"}})


def test_the_config_docstring_shows_the_defaults():
    block = config.__doc__.split("[stages]")[1].split("[settings]")[0]
    for s in STAGE_TABLE:
        assert f'{s.name} = "{s.default}"' in block


def test_stage_of_a_component_from_its_method(registry):
    class Two:
        def kappa(self):
            pass

        def predict(self):
            pass

    assert stage_of(registry.get("relation", "homology")) == "relation"
    with pytest.raises(ConfigError, match="several stages \\(opacity, relation\\)"):
        stage_of(Two())
    with pytest.raises(ConfigError, match="has none of the stage methods profile\\(\\) \\(profile\\), kappa\\(\\)"):
        stage_of(object())


def _lists_all_stages(node) -> bool:
    """Whether an ast node is a literal tuple, list, set or dict (keys) holding every stage name."""
    if isinstance(node, (ast.Tuple, ast.List, ast.Set)):
        items = node.elts
    elif isinstance(node, ast.Dict):
        items = [k for k in node.keys if k is not None]
    else:
        return False
    return set(STAGES) <= {i.value for i in items if isinstance(i, ast.Constant) and isinstance(i.value, str)}


def test_the_four_names_are_listed_in_one_place_only():
    found = []
    for folder in ("pipeline", "plugins"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            if path == ROOT / "pipeline" / "host" / "stages.py":
                continue
            tree = ast.parse(path.read_text(), filename=str(path))
            found += [f"{path.relative_to(ROOT)}:{n.lineno}" for n in ast.walk(tree) if _lists_all_stages(n)]
    assert not found, f"stage names listed outside radwalk.host.stages: {found}"
