"""Star ids are text, kept exactly as written, whatever they look like."""

from astropy.table import Table

from radwalk.results.document import document
from radwalk.results.files import write_table
from radwalk.results.layout import star_folder
from radwalk.results.table import build_summary_table
from radwalk.run.catalog import read_catalog

IDS = ["007", "010", "1e3", "1", "1.0", "-0", "NaN-like", " 5"]


def _csv(path, ids, sep=","):
    rows = [sep.join(["id", "radius", "radius_err", "luminosity", "luminosity_err"])]
    rows += [sep.join([i, "1.0", "0.05", "1.0", "0.05"]) for i in ids]
    path.write_text("\n".join(rows) + "\n")
    return path


def test_numeric_looking_ids_are_kept_as_written(tmp_path):
    # Before: 007, 010 and 1e3 came out as 7.0, 10.0 and 1000.0, and 1 and 1.0 were refused as duplicates.
    cat = read_catalog(_csv(tmp_path / "c.csv", IDS[:6]))
    assert [e.id for e in cat] == IDS[:6]
    assert all(e.star is not None and e.star.id == e.id for e in cat)
    assert star_folder(tmp_path, "007").name == "007"


def test_tab_separated_ids_are_kept_too(tmp_path):
    cat = read_catalog(_csv(tmp_path / "c.tsv", ["007", "1e3"], sep="\t"))
    assert [e.id for e in cat] == ["007", "1e3"]


def test_ids_survive_the_summary_table(tmp_path):
    docs = [document(i, "failed", "x", {"radius": (1.0, 0.1)}, None, 1, 0.0) for i in ("007", "1e3", "10")]
    t = build_summary_table(docs)
    write_table(t, tmp_path / "s.ecsv")
    assert list(Table.read(tmp_path / "s.ecsv")["id"]) == ["007", "1e3", "10"]
