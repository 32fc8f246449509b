"""`radwalk grid build` exits 1 and names the tracks when some failed (README: exit status 1), 0 when none did."""

from __future__ import annotations

import numpy as np
import pytest

from radwalk.cli.grid import failed_tracks_status
from radwalk.forward import model_grid as mg
from radwalk.forward.model_grid import track_opacity
from radwalk.host.config import RunConfig
from radwalk.inference.fit import stages_for

ONE = dict(n_mass=1, z_range=(0.014, 0.014), n_z=1, n_phase=11, dXc=0.05)


def _default_kappa():
    stages = stages_for(RunConfig())
    return track_opacity(stages.bound_opacity(stages.defaults()))


DEFAULT = _default_kappa()


def hot_core_nan(rho, T, X, Z):
    """The default law, but NaN above 1.2e7 K: every main-sequence core above ~1 M_sun reaches that."""
    return np.where(np.asarray(T) > 1.2e7, np.nan, DEFAULT(rho, T, X, Z))


def test_a_grid_with_a_failed_track_exits_1_and_names_it(capsys):
    # a real build whose zero-age model cannot be solved (the law gives NaN in the core): the track is NaN
    grid = mg.build_grid(hot_core_nan, mg.GridSpec(mass_range=(2.0, 2.0), **ONE), workers=1, progress=False)
    assert np.isnan(grid.lifetime).all()
    assert failed_tracks_status(grid) == 1
    err = capsys.readouterr().err
    assert err.startswith("radwalk: 1 of 1 tracks failed (NaN in the grid):")
    assert "failed: 2 M_sun, Z = 0.014: zero-age model not solved" in err


@pytest.mark.slow
def test_a_grid_whose_tracks_all_finished_exits_0(capsys):
    grid = mg.build_grid(DEFAULT, mg.GridSpec(mass_range=(2.0, 2.0), **ONE), workers=1, progress=False)
    assert np.isfinite(grid.lifetime).all()
    assert failed_tracks_status(grid) == 0
    assert capsys.readouterr().err == ""
