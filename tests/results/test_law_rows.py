"""summary.ecsv and summary.fits of a run comparing two opacity laws: one row a star and law, read back with
astropy; the failing law's row of a star is failed and names the law, the other law's row keeps its fit."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "run"))
from law_run import FAILING_LAW, FAILING_STAR, LAWS, STARS, two_law_run  # noqa: E402

from radwalk.results.table import EXTNAME  # noqa: E402


def number(x) -> float:
    """A table cell as a float: astropy reads a FITS NaN back as masked."""
    return float(np.ma.filled(x, np.nan))


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out, _ = two_law_run(tmp_path_factory)
    return out


@pytest.mark.parametrize("name", ["summary.ecsv", "summary.fits"])
def test_every_law_has_its_row_of_every_star(run, name):
    t = Table.read(run / name, **({"hdu": EXTNAME} if name.endswith(".fits") else {}))
    assert len(t) == len(STARS) * len(LAWS)
    assert [(str(i), str(o)) for i, o in zip(t["id"], t["opacity"])] == [(s, law) for s in STARS for law in LAWS]
    assert list(t["primary"]) == [law == LAWS[0] for _ in STARS for law in LAWS]
    assert t["mass_p50"].unit == "solMass" and t["diffusion_time_p50"].unit == "yr"
    rows = {(str(r["id"]), str(r["opacity"])): r for r in t}
    bad = rows[(FAILING_STAR, FAILING_LAW)]
    assert bad["status"] == "failed" and np.isnan(number(bad["mass_p50"])) and not bad["converged"]
    assert str(bad["reason"]).startswith(f"opacity law {FAILING_LAW!r} failed: no model within the priors")
    kept = rows[(FAILING_STAR, LAWS[0])]
    assert kept["status"] in ("ok", "not-converged") and np.isfinite(number(kept["mass_p50"]))
    assert f"opacity law {FAILING_LAW!r} failed" in str(kept["warnings"])
    for star in STARS:
        if star != FAILING_STAR:
            a, b = rows[(star, LAWS[0])], rows[(star, LAWS[1])]
            ma, mb = number(a["mass_p50"]), number(b["mass_p50"])
            assert np.isfinite(ma) and np.isfinite(mb) and ma != mb
    # the one-row-a-star table of the run's first law
    assert [str(x) for x in t[t["primary"]]["id"]] == list(STARS)


def test_the_headers_name_the_laws(run):
    with fits.open(run / "summary.fits") as hdus:
        header = hdus[EXTNAME].header
        assert header["NSTARS"] == len(STARS) and header["NAXIS2"] == len(STARS) * len(LAWS)
        assert header["NLAWS"] == 2 and (header["LAW1"], header["LAW2"]) == LAWS and header["OPACITY"] == LAWS[0]
        names = [header[f"TTYPE{j}"] for j in range(1, header["TFIELDS"] + 1)]
        assert header[f"TCOMM{names.index('primary') + 1}"].startswith("true on the row of the run's first")
    meta = Table.read(run / "summary.ecsv").meta
    assert meta["laws"] == list(LAWS) and meta["stars"] == len(STARS) and meta["stages"]["opacity"] == LAWS[0]
