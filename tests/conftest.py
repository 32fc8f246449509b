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
