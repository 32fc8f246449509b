"""The run-folder layout: star folder names from user ids, and the chain file names."""

from astropy.table import Table

from radwalk.results.layout import chain_file_name, safe_folder_name, star_folder
from radwalk.run.catalog import read_catalog


def _write(t, path, **kw):
    t.write(path, **kw)
    return path


def test_unsafe_ids_map_to_safe_unique_folders_inside(tmp_path):
    ids = ["../x", "a/b", "a_b", "name with spaces", "<script>alert(1)</script>", "..", ".", "/etc/passwd",
           "a\\b", "Ünïcode ☆", "x" * 200]
    t = Table({"id": ids, "radius": [1.0] * len(ids), "radius_err": [0.1] * len(ids)})
    cat = read_catalog(_write(t, tmp_path / "c.ecsv"))
    assert [e.id for e in cat.stars] == ids
    out = tmp_path / "run"
    folders = [star_folder(out, sid) for sid in ids]
    assert len(set(folders)) == len(ids)
    assert len({f.name.lower() for f in folders}) == len(ids)
    for f in folders:
        assert f.parent == (out / "stars").resolve()
        assert all(c.isalnum() or c in "._-" for c in f.name) and f.name.isascii()
        assert not f.name.startswith(".")
        assert len(f.name) <= 80
    assert safe_folder_name("a_b") == "a_b" and star_folder(out, "a/b").name != "a_b"


def test_chain_file_names():
    assert chain_file_name("combined", primary=True) == "chain.h5"
    assert chain_file_name("kramers", primary=False) == "chain-kramers.h5"
    assert chain_file_name("combined", primary=True, partial=True) == "chain.partial.h5"
    assert chain_file_name("kramers", primary=False, partial=True) == "chain-kramers.partial.h5"
