"""One-off results kept in the cache folder: the track grid's source scan (issue 13)."""

import json

from radwalk.forward import disk_memo, model_grid
from radwalk.forward.model_grid import solver_sources


def fresh_scan():
    model_grid._IMPORTS.clear()  # this process's copy: the next scan reads the cache folder
    return solver_sources(), solver_sources("radwalk.plugins.opacity")


def test_source_scan_is_the_same_with_an_empty_a_kept_and_a_broken_memo(tmp_path, monkeypatch):
    # The grid's key hashes these: a kept scan must give exactly what parsing the files gives.
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path / "empty"))
    parsed = fresh_scan()
    assert "radwalk.physics.structure.solver" in parsed[0] and "radwalk.constants" in parsed[0]
    kept = disk_memo.load("imports")
    assert kept, "the scan was not kept"
    parses = []
    real = model_grid._imported_names
    monkeypatch.setattr(model_grid, "_imported_names", lambda *a: parses.append(a[1]) or real(*a))
    assert fresh_scan() == parsed
    assert parses == []  # a later process parses nothing
    # every module hashed is kept under its own file's SHA-256: an edited file is parsed again
    for name, sha in parsed[0].items():
        assert any(key.startswith(f"{name}:{sha}:") for key in kept), name
    # a memo file that is not JSON counts as empty
    disk_memo._path("imports").write_text("{not json")
    assert fresh_scan() == parsed
    assert len(parses) >= len(parsed[0])
    assert json.loads(disk_memo._path("imports").read_text())  # rewritten whole


def test_kept_names_are_the_ones_a_parse_finds(tmp_path, monkeypatch):
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path))
    fresh_scan()
    import importlib.util
    from pathlib import Path

    for key, names in disk_memo.load("imports").items():
        module = key.split(":")[0]
        path = Path(importlib.util.find_spec(module).origin)
        assert sorted(model_grid._imported_names(path, module, False)) == names, module


def test_an_unwritable_cache_folder_only_costs_the_parse(tmp_path, monkeypatch):
    blocked = tmp_path / "file"
    blocked.write_text("")
    monkeypatch.setenv("RADWALK_CACHE", str(blocked / "cache"))  # a folder below a file cannot be made
    model_grid._IMPORTS.clear()
    assert solver_sources()
    assert disk_memo.load("imports") == {}
