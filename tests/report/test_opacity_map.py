"""The log-kappa map of an opacity law that `radwalk check-plugin` writes beside its table."""

from __future__ import annotations

import numpy as np
import pytest

from radwalk.errors import ConfigError
from radwalk.host.registry import Registry
from radwalk.report.opacity_map import log_kappa_grid, plot_log_kappa_map


@pytest.fixture(autouse=True)
def _mpl_config(tmp_path, monkeypatch):
    monkeypatch.setenv("MPLCONFIGDIR", str(tmp_path / "mpl"))


@pytest.fixture(scope="module")
def registry():
    return Registry(entry_points=False)


def test_log_kappa_map_png(tmp_path, registry, kramers_table):
    out = plot_log_kappa_map(registry.entries["opacity"]["combined"], tmp_path / "maps" / "combined.png")
    data = out.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000
    # a law that refuses points outside its grid is drawn inside it only
    strict = plot_log_kappa_map(registry.entries["opacity"]["tabulated"], tmp_path / "tab.png",
                                options={"table": kramers_table, "outside": "error"})
    assert strict.stat().st_size > 10_000
    with pytest.raises(ConfigError, match="draws opacity laws"):
        plot_log_kappa_map(registry.entries["relation"]["homology"], tmp_path / "no.png")


def test_the_map_reaches_beyond_the_range_and_blanks_refused_points(registry, kramers_table):
    law = registry.entries["opacity"]["tabulated"].component.configure(table=kramers_table, outside="error")
    LT, LR, logk = log_kappa_grid(law, 0.7, 0.02, grid_points=40)
    # table: log T 4..8, log rho -8..2; the map pads 15 % of each span, at least 0.3 dex
    assert LT.min() == pytest.approx(4.0 - 0.6) and LT.max() == pytest.approx(8.0 + 0.6)
    assert LR.min() == pytest.approx(-8.0 - 1.5) and LR.max() == pytest.approx(2.0 + 1.5)
    inside = (LT >= 4) & (LT <= 8) & (LR >= -8) & (LR <= 2)
    assert np.isfinite(logk[inside]).all() and np.isnan(logk[~inside]).all()
    # inside, the map shows the table's law: bilinear interpolation of log kappa over 0.25 dex steps misses
    # log10(a + b 10^(s u)) by at most max|f''| h^2 / 8 per axis, max|f''| = (s ln 10)^2 / (4 ln 10):
    # 0.055 dex along T (s = -3.5) plus 0.0045 dex along rho (s = 1)
    expected = np.log10(0.2 * 1.7 + 4e24 * 0.02 * 1.7 * 10**LR * 10 ** (-3.5 * LT))
    assert np.max(np.abs(logk[inside] - expected[inside])) < 0.06
