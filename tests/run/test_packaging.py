"""Packaging: what a wheel carries, and radwalk installed from that wheel alone (not from the clone)."""

from __future__ import annotations

import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[2]
DEMO_FILES = ("demo_stars.ecsv", "truths.ecsv", "demo.toml")
# What a wheel is built from: everything but the local venv, caches and build leftovers (a stale build/ folder
# would leak removed modules into the wheel).
_NOT_SOURCE = shutil.ignore_patterns(".venv", ".git", ".cache", "build", "*.egg-info", "__pycache__",
                                     ".pytest_cache", ".ruff_cache", "radwalk-demo", ".grid-new")


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    """A wheel built by pip from a copy of the source tree (the build backend comes from the package index)."""
    src = tmp_path_factory.mktemp("src") / "radwalk"
    shutil.copytree(ROOT, src, ignore=_NOT_SOURCE)
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", str(src), "-w", str(out)],
                   check=True, capture_output=True, text=True)
    (found,) = out.glob("radwalk-*.whl")
    return found


@pytest.mark.subprocess
def test_wheel_carries_the_demo_catalog(wheel):
    names = set(zipfile.ZipFile(wheel).namelist())
    for name in DEMO_FILES + ("README.md",):
        assert f"radwalk/data/demo_catalog/{name}" in names
    # beside the other package data the installed package needs
    assert any(n.startswith("radwalk/data/grids/trackgrid-") and n.endswith(".npz") for n in names)
    assert any(n.startswith("radwalk/report/templates/") for n in names)


@pytest.mark.slow
@pytest.mark.subprocess
def test_demo_runs_from_a_wheel_in_a_fresh_venv(wheel, tmp_path):
    """A fresh venv with the wheel and its dependencies from the package index (a few minutes)."""
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
    py = venv / "bin" / "python"
    subprocess.run([str(py), "-m", "pip", "install", "--quiet", str(wheel)], check=True, capture_output=True,
                   text=True)
    # run outside the clone, so nothing can be imported or read from the source tree
    where = subprocess.run([str(py), "-c", "import radwalk.run.demo as d, json; "
                            "print(json.dumps({k: str(v) for k, v in d.demo_paths().items()}))"],
                           cwd=tmp_path, check=True, capture_output=True, text=True)
    import json

    paths = {k: Path(v) for k, v in json.loads(where.stdout).items()}
    site = venv / "lib"
    for key, name in zip(("catalog", "truths", "config"), DEMO_FILES):
        assert paths[key].name == name and paths[key].is_file()
        assert site in paths[key].parents  # the installed copy, not the clone's demo_catalog/
        assert paths[key].read_bytes() == (ROOT / "demo_catalog" / name).read_bytes()
    helped = subprocess.run([str(venv / "bin" / "radwalk"), "demo", "--help"], cwd=tmp_path,
                            capture_output=True, text=True)
    assert helped.returncode == 0, helped.stderr
    assert "demo" in helped.stdout
    # the wheel's own dependencies leave Dask out: it is an extra, and asking for it says which
    assert subprocess.run([str(py), "-c", "import distributed"], capture_output=True).returncode != 0
    refused = subprocess.run([str(venv / "bin" / "radwalk"), "run", str(paths["catalog"]), "--out",
                              str(tmp_path / "out"), "--executor", "dask"], cwd=tmp_path, capture_output=True,
                             text=True)
    assert refused.returncode == 2
    assert "radwalk[dask]" in refused.stderr
    assert not (tmp_path / "out").exists()


def test_cache_folder_follows_the_platform(monkeypatch, tmp_path):
    """Linux: $XDG_CACHE_HOME, else ~/.cache (XDG Base Directory Specification); $RADWALK_CACHE wins over both."""
    from radwalk.forward.grid import cache_dir

    if not sys.platform.startswith("linux"):
        pytest.skip("the expected folders below are Linux's")
    monkeypatch.delenv("RADWALK_CACHE", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert cache_dir() == tmp_path / "xdg" / "radwalk"
    monkeypatch.delenv("XDG_CACHE_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert cache_dir() == tmp_path / "home" / ".cache" / "radwalk"
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path / "mine"))
    assert cache_dir() == tmp_path / "mine"


@pytest.mark.subprocess
def test_dask_executor_without_dask_names_the_extra(tmp_path):
    """Dask made unimportable in a child process (None in sys.modules is Python's documented import block); the
    fresh-venv test above checks the same with Dask really absent."""
    code = ("import sys; sys.modules['distributed'] = None\n"
            "from radwalk.cli.main import main\n"
            f"sys.exit(main(['run', {str(ROOT / 'demo_catalog' / 'demo_stars.ecsv')!r}, '--out', "
            f"{str(tmp_path / 'out')!r}, '--executor', 'dask']))")
    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 2, done.stderr
    assert "pip install 'radwalk[dask]'" in done.stderr
    assert not (tmp_path / "out").exists()  # refused before any output folder is made


def test_written_run_toml_reads_back_equal(tmp_path):
    """run.toml is written by tomli-w: the config and the provenance read back as they went in."""
    from radwalk.host import config as cfgmod
    from radwalk.run.demo import demo_paths
    from radwalk.run.orchestrate import write_run_toml

    base = cfgmod.load(demo_paths()["config"])
    config = cfgmod.from_dict({
        **base.to_dict(),
        "stages": {**base.to_dict()["stages"], "opacity": ["combined", "kramers"]},
        "settings": {"band_stars": 8, "note": 'a "quoted" C:\\path, ünïcode\nand a newline'},
        "priors": {"mass": {"kind": "uniform", "lower": 0.5, "upper": 3}, "g_bf": {}, "age": {"upper": 12}},
        "columns": {"radius": "R [Rsun]", "teff": "T.eff"},
        "run": {"seed": 7, "plugins": []},
    })
    provenance = {"seed": 7, "catalog": str(tmp_path / "odd \"name\".ecsv"), "plugins": [],
                  "workers": np.int64(2), "limit": float("inf"), "started": "2026-12-03T13:00:00Z",
                  "components": {"opacity": {"combined": {"module": "radwalk.plugins.opacity", "version": None}}}}
    path = tmp_path / "run.toml"
    write_run_toml(path, config, provenance)
    assert cfgmod.load(path) == config  # [provenance] is ignored when read as a config
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert data["provenance"] == {**provenance, "workers": 2,
                                  "components": {"opacity": {"combined": {"module": "radwalk.plugins.opacity"}}}}
    assert {k: v for k, v in data.items() if k != "provenance"} == tomllib.loads(cfgmod.to_toml(config.to_dict()))
