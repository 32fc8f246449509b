"""summary.fits and summary.ecsv describe themselves: column descriptions (TCOMMn in FITS), EXTNAME, and the run's
seed, stages and versions in the header and meta; written from a real fit and read back with astropy."""

from __future__ import annotations

import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table

from radwalk import __version__
from radwalk.host.config import from_dict
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.results.document import result_document
from radwalk.results.files import write_table
from radwalk.results.table import EXTNAME, build_summary_table, fits_safe

CONFIG = {
    "stages": {"profile": "polytrope", "opacity": "combined", "relation": "homology", "likelihood": "gaussian"},
    "sampler": {"walkers": 16, "chunk": 100, "max_steps": 200, "derived_samples": 40, "optimizer_starts": 1},
    "run": {"seed": 11},
}


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    out = tmp_path_factory.mktemp("run")
    config = from_dict(CONFIG)
    docs = []
    for i, name in enumerate(("Sun-like", "failing star")):
        star = Star.from_user_units(name, 1.0, 0.05, 1.0, 0.05, 5772.0, 100.0)
        if i == 1:  # a failed star's row: no fit, NaN numbers
            star = Star.from_user_units(name, 1.0, 0.05, 1e9, 1e7, 5772.0, 100.0)
        result = fit_star(star, config, outdir=None, plots=False)
        docs.append({**result_document(star, config, result), "folder": f"star-{i}"})
    table = build_summary_table(docs)
    write_table(table, out / "summary.ecsv")
    write_table(fits_safe(table), out / "summary.fits")
    return out, table


def test_fits_columns_have_descriptions_and_the_header_provenance(written):
    out, table = written
    with fits.open(out / "summary.fits") as hdus:
        hdu = hdus[EXTNAME]
        header = hdu.header
        assert header["EXTNAME"] == "SUMMARY" and header["NSTARS"] == 2
        assert header["SEED"] == 11 and header["RADWALK"] == __version__
        assert (header["PROFILE"], header["OPACITY"], header["RELATION"], header["LIKELIHO"]) == \
            ("polytrope", "combined", "homology", "gaussian")
        assert header["V_NUMPY"] == np.__version__ and header["V_ASTROP"]
        names = [header[f"TTYPE{j}"] for j in range(1, header["TFIELDS"] + 1)]
        comments = {name: header.get(f"TCOMM{j}") for j, name in enumerate(names, start=1)}
    assert names == table.colnames
    assert all(comments.values()), [n for n, c in comments.items() if not c]
    assert comments["mass_p50"] == "mass: 50th percentile of the posterior"
    assert comments["diffusion_time_p16"].endswith(": 16th percentile over the posterior samples")
    assert comments["status"].startswith("ok (converged), not-converged")
    # astropy reads the same table back, units included
    back = Table.read(out / "summary.fits", hdu=EXTNAME)
    assert back["mass_p50"].unit == "solMass" and list(back["id"]) == ["Sun-like", "failing star"]


def test_ecsv_meta_and_column_descriptions(written):
    out, _ = written
    back = Table.read(out / "summary.ecsv", format="ascii.ecsv")
    assert back.meta["seed"] == 11
    assert back.meta["stages"] == {"profile": "polytrope", "opacity": "combined", "relation": "homology",
                                   "likelihood": "gaussian"}
    assert back.meta["versions"]["radwalk"] == __version__ and back.meta["versions"]["numpy"] == np.__version__
    assert all(back[name].description for name in back.colnames)
    assert back["status"][1] == "failed" and np.isnan(back["mass_p50"][1])
