import os
import tempfile

import matplotlib

matplotlib.use("Agg")
os.environ.setdefault("MPLCONFIGDIR", tempfile.mkdtemp(prefix="radwalk-mpl-"))

import numpy as np  # noqa: E402
import pytest  # noqa: E402


@pytest.fixture(scope="session")
def registry():
    from radwalk.host.registry import Registry

    return Registry()


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


@pytest.fixture(scope="session")
def kramers_table(tmp_path_factory):
    """A small text opacity table (the layout of radwalk.plugins.tabulated), Kramers-like values."""
    path = tmp_path_factory.mktemp("table") / "table.txt"
    log_T = np.arange(4.0, 8.01, 0.25)
    lines = ["# axes: log_rho log_T", "# units: g/cm^3 K cm^2/g"]
    for X in (0.6, 0.75):
        lines += [f"# X: {X}", "# Z: 0.02", " ".join(f"{t:.2f}" for t in log_T)]
        for r in np.arange(-8.0, 2.01, 0.25):
            k = 0.2 * (1 + X) + 4e24 * 0.02 * (1 + X) * 10**r * 10.0 ** (-3.5 * log_T)
            lines.append(f"{r:.2f} " + " ".join(f"{v:.8f}" for v in np.log10(k)))
    path.write_text("\n".join(lines) + "\n")
    return str(path)


# A small grid of main-sequence tracks for the track-grid components: 5 masses over 0.8-2 M_sun x 2
# metallicities (Z 0.01, 0.02), 21 phases, evolution steps of 0.05 in X_c (the default grid takes 0.02), with the
# default opacity law at its default parameters.  10 tracks, about 30 s of CPU (3-4 s each, measured), built once
# on 2 worker processes and kept in the cache folder ($RADWALK_CACHE, which `make test` points at .cache), so a
# later session only loads it.
SMALL_TRACK_GRID = dict(mass_range=(0.8, 2.0), n_mass=5, z_range=(0.01, 0.02), n_z=2, n_phase=21, dXc=0.05)


@pytest.fixture(scope="session")
def small_track_grid(registry, tmp_path_factory):
    """Path of the small track-grid file (built on first use), for the ``grid`` option of the track-grid stages."""
    from radwalk.forward.model_grid import GridSpec, MeshOpacity, cached_grid, grid_key, grid_path

    law = registry.get("opacity", "combined")
    kappa = MeshOpacity(law, {p.name: p.default for p in law.params})
    spec = GridSpec(**SMALL_TRACK_GRID)
    grid = cached_grid(kappa, spec, workers=2, progress=False)
    path = grid_path(grid_key(kappa, spec))
    if not path.is_file():  # a cache folder that cannot be written: keep it for this session only
        path = grid.save(tmp_path_factory.mktemp("trackgrid") / path.name)
    return str(path)


@pytest.fixture(scope="session")
def profile_error():
    """``errors(stages, values, regions)`` -> {region: {field: (largest |error| in dex, r/R there)}}: one star's
    stored profile (``StageSet.quick_bands``) against the star solved at the same (M, Z, age)
    (``StageSet.structure``), over each region's lo < r/R <= hi (default one region, 0-0.95), for rho, T, kappa,
    the mean free path and the cumulative diffusion time."""

    def errors(stages, values, regions=None):
        r_rel, fields = stages.quick_bands(values)
        prof, tr = stages.structure(values, [np.nan], [np.nan])
        solved_r = prof.r[0] / prof.R[0]
        solved = {"rho": prof.rho[0], "T": prof.T[0], "kappa": tr.fields["kappa"][0],
                  "mean_free_path": tr.fields["mean_free_path"][0],
                  "diffusion_time_cumulative": tr.fields["diffusion_time_cumulative"][0]}
        out = {}
        for region, (lo, hi) in (regions or {"all": (0.0, 0.95)}).items():
            part = (r_rel > lo) & (r_rel <= hi)
            out[region] = {}
            for name, v in solved.items():
                with np.errstate(divide="ignore"):  # the cumulative time is 0 at the centre, never compared
                    err = np.abs(np.log10(fields[name][0, part]) - np.interp(r_rel[part], solved_r, np.log10(v)))
                k = int(np.argmax(err))
                out[region][name] = (float(err[k]), float(r_rel[part][k]))
        return out

    return errors


DYNAMICAL_MASSES = os.path.join(os.path.dirname(__file__), "data", "dynamical_masses.csv")


def load_dynamical_mass_stars(path=DYNAMICAL_MASSES):
    """Real stars with dynamically measured masses (tests/data/dynamical_masses.csv; papers in its columns).

    Returns
    -------
    list of dict
        Per row: ``star`` (radwalk.inference.star.Star, read through the catalog reader, so a row marked
        ``luminosity_derived`` reaches the likelihood without L), ``mass`` and ``mass_err`` (M_sun),
        ``system``, ``component``, ``orbit`` (eclipsing or astrometric), ``stage`` (main sequence, late
        main sequence, subgiant), ``reference`` and ``source_note``.
    """
    from astropy.table import Table

    from radwalk.run.catalog import read_catalog

    catalog = read_catalog(path)
    bad = [e.error for e in catalog.stars if e.star is None]
    if bad:
        raise ValueError(f"{path}: unusable rows: {bad}")
    extra = Table.read(path, format="ascii.csv")
    rows = []
    for entry, row in zip(catalog.stars, extra):
        rows.append({"star": entry.star, "mass": float(row["mass"]), "mass_err": float(row["mass_err"]),
                     **{key: str(row[key]) for key in ("system", "component", "orbit", "stage", "reference",
                                                       "source_note")}})
    return rows


@pytest.fixture(scope="session")
def dynamical_mass_stars():
    """:func:`load_dynamical_mass_stars`, read once per session."""
    return load_dynamical_mass_stars()
