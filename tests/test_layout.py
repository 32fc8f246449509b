"""The package's layering, read from the import graph with ast (lazy imports inside functions included).

Rules (DESIGN section 2): no import cycles between modules; a lower layer never imports a higher one
(constants/errors < host < physics < forward model < inference < run < cli; results beside it; the report reads
stored results only, and a fit may draw its plots through it); built-in plugins reach host and physics only
(and the track grid of the forward model) and never each other; argparse only in the CLI; emcee only in the
sampler; distributed only in the executors.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
FOLDERS = {"radwalk": ROOT / "pipeline", "radwalk.plugins": ROOT / "plugins"}

# What each layer may import from the package (besides itself).
ALLOWED = {
    "base": set(),
    "host": {"base"},
    "physics": {"base", "host"},
    "forward": {"base", "host", "physics"},
    "results": {"base", "host", "physics", "forward"},
    # A fit draws its star's plots when it ends, so inference may call the report's figures; the report
    # itself never imports inference.
    "inference": {"base", "host", "physics", "forward", "results", "report"},
    "report": {"base", "host", "physics", "forward", "results"},
    "run": {"base", "host", "physics", "forward", "results", "inference", "report"},
    "cli": {"base", "host", "physics", "forward", "results", "inference", "report", "run", "plugins", "api"},
    "api": {"base", "host", "physics", "forward", "results", "inference", "report"},
    "plugins": {"base", "host", "physics"},
}
# Modules of higher layers a built-in plugin may read: the grid of main-sequence tracks (and the cache folder it
# lives in), which the track-grid stages interpolate.  Neither imports a plugin, so no cycle can form.
PLUGIN_READS = {"radwalk.forward.model_grid", "radwalk.forward.grid"}
ONLY_IN = {  # third-party module -> the modules allowed to import it
    "argparse": lambda mod: mod.startswith("radwalk.cli"),
    "emcee": lambda mod: mod == "radwalk.inference.sampler",
    "distributed": lambda mod: mod == "radwalk.run.executors",
}


def _modules() -> dict[str, Path]:
    out = {}
    for prefix, folder in FOLDERS.items():
        for path in folder.rglob("*.py"):
            parts = list(path.relative_to(folder).with_suffix("").parts)
            if parts[-1] == "__init__":
                parts = parts[:-1]
            out[".".join([prefix, *parts])] = path
    return out


MODULES = _modules()


def _imports(name: str, path: Path) -> set[str]:
    """Every module this file imports, anywhere in it, as absolute dotted names."""
    tree = ast.parse(path.read_text(), filename=str(path))
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            found.add(mod)
            # "from radwalk.physics import energy" imports the module radwalk.physics.energy
            found.update(f"{mod}.{a.name}" for a in node.names if f"{mod}.{a.name}" in MODULES)
    return found


GRAPH = {name: _imports(name, path) for name, path in MODULES.items()}
# The package root's only import of the package is the lazy `radwalk.fit` / `radwalk.model` entry point,
# taken when a user asks for it; modules that read `radwalk.__version__` must not make that a cycle.
ROOT_IMPORTS = GRAPH.pop("radwalk")


def layer(module: str) -> str:
    if module.startswith("radwalk.plugins"):
        return "plugins"
    parts = module.split(".")
    if len(parts) == 1 or parts[1] in ("constants", "errors", "__main__"):
        return "cli" if module == "radwalk.__main__" else "base"
    return parts[1]


def _internal(targets):
    return {t for t in targets if t in MODULES}


def test_the_package_root_imports_only_the_api():
    assert {m for m in ROOT_IMPORTS if m in MODULES} - {"radwalk"} == {"radwalk.api"}


def test_every_module_is_seen():
    assert {"radwalk.host.registry", "radwalk.physics.transport", "radwalk.cli.main", "radwalk.plugins.opacity"} \
        <= set(MODULES)


def test_no_import_cycles():
    graph = {m: {x for x in t if x in GRAPH} - {m} for m, t in GRAPH.items()}
    # Package __init__ files are entry points that may re-export their children lazily; they join no cycle
    # through their own children.
    state, stack, cycles = {}, [], []

    def visit(m):
        state[m] = 1
        stack.append(m)
        for t in sorted(graph[m]):
            if state.get(t) == 1:
                cycles.append(stack[stack.index(t):] + [t])
            elif t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m)
    assert not cycles, "import cycles: " + "; ".join(" -> ".join(c) for c in cycles[:5])


@pytest.mark.parametrize("module", sorted(GRAPH))
def test_layers_only_look_down(module):
    mine = layer(module)
    bad = []
    for target in sorted(_internal(GRAPH[module])):
        theirs = layer(target)
        if target == "radwalk" and mine != "base":
            continue  # the package root: its version string
        if mine == "plugins" and target in PLUGIN_READS:
            continue
        if theirs != mine and theirs not in ALLOWED[mine]:
            bad.append(f"{target} ({theirs})")
        if mine == "plugins" and theirs == "plugins" and target != module and target != "radwalk.plugins":
            bad.append(f"{target} (built-in plugins never import each other)")
    assert not bad, f"{module} ({mine}) imports " + ", ".join(bad)


@pytest.mark.parametrize("library", sorted(ONLY_IN))
def test_libraries_stay_in_their_room(library):
    users = sorted(m for m, t in GRAPH.items() if any(x == library or x.startswith(library + ".") for x in t))
    assert users, f"nothing imports {library}: the rule would pass vacuously"
    bad = [m for m in users if not ONLY_IN[library](m)]
    assert not bad, f"{library} imported outside its room by {bad}"


@pytest.mark.subprocess
def test_help_and_version_import_no_heavy_library():
    heavy = ("emcee", "matplotlib", "corner", "h5py", "distributed")
    code = ("import sys, contextlib, io\n"
            "from radwalk.cli.main import main\n"
            "for argv in (['--help'], ['--version'], ['model', '--help']):\n"
            "    with contextlib.redirect_stdout(io.StringIO()):\n"
            "        try:\n"
            "            main(argv)\n"
            "        except SystemExit:\n"
            "            pass\n"
            f"print(','.join(m for m in {heavy!r} if m in sys.modules))\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "", f"radwalk --help imported {r.stdout.strip()}"
