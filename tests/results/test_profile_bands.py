"""Profile bands over samples whose layers sit at different r/R (a solved star's mass mesh)."""

import numpy as np

from radwalk.results.products import BAND_PERCENTILES, profile_bands


def test_shared_grid_bands_are_the_plain_percentiles():
    r = np.tile(np.linspace(0.0, 1.0, 9), (4, 1))
    rho = np.outer([1.0, 2.0, 3.0, 4.0], 1.0 - r[0] ** 2)
    grid, bands = profile_bands(r, {"rho": rho})
    assert np.array_equal(grid, r[0])
    assert np.array_equal(bands["rho"], np.percentile(rho, BAND_PERCENTILES, axis=0))


def test_samples_on_their_own_grids_are_banded_at_the_same_radius():
    # the same profile 1 - (r/R)^2 on three meshes that put their layers at different r/R: every band row is
    # the profile itself, to the error bound of linear interpolation, h^2/8 max|f''| with h the widest step
    base = np.linspace(0.0, 1.0, 65)
    r = np.array([base, base**1.3, base**0.8])
    f = 1.0 - r**2
    grid, bands = profile_bands(r, {"f": f})
    assert np.all(np.diff(grid) >= 0) and grid[0] == 0.0 and grid[-1] == 1.0
    h = np.diff(r, axis=1).max()
    assert np.abs(bands["f"] - (1.0 - grid**2)).max() <= h**2 / 8 * 2.0
    # banded point by point along the mesh (as before), the same profile would spread by 0.18
    assert np.ptp(f, axis=0).max() > 0.1


def test_a_convective_envelope_stays_at_its_radius():
    # envelopes from r/R = 0.70 in every sample, on different meshes: the median row switches at 0.70
    base = np.linspace(0.0, 1.0, 201)
    r = np.array([base, base**1.2, base**0.9])
    conv = (r >= 0.7).astype(float)
    grid, bands = profile_bands(r, {"convective": conv})
    median = bands["convective"][BAND_PERCENTILES.index(50.0)]
    edge = grid[np.argmax(median >= 0.5)]
    assert abs(edge - 0.70) < 0.01
