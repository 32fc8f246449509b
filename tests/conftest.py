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
