"""chain.h5 reads alone: parameter names and units, burn-in, thinning, seed, star id, versions, and the derived
samples beside the chain, written by a real (short) fit and read back with h5py."""

from __future__ import annotations

import json
import warnings

import h5py
import numpy as np
import pytest

from radwalk.host.config import from_dict
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.results.chain import read_chain, to_arviz

CONFIG = {
    "stages": {"profile": "polytrope", "opacity": "combined", "relation": "homology", "likelihood": "gaussian"},
    "sampler": {"walkers": 16, "chunk": 100, "max_steps": 200, "derived_samples": 60, "optimizer_starts": 1},
    "run": {"seed": 7},
}


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    folder = tmp_path_factory.mktemp("star")
    config = from_dict(CONFIG)
    star = Star.from_user_units("HD chain-test", 1.0, 0.05, 1.0, 0.05, 5772.0, 100.0)
    result = fit_star(star, config, outdir=folder, plots=False)
    assert result.status in ("ok", "not-converged"), result.reason
    return folder / "chain.h5", result.summary


def test_attributes_describe_the_chain(fitted):
    path, summary = fitted
    with h5py.File(path, "r") as f:
        a = f.attrs
        names = [str(n) for n in a["names"]]
        assert names == [n for n, p in summary["parameters"].items() if not p["drawn_from_prior"]]
        units = dict(zip(names, (str(u) for u in a["units"])))
        assert units["mass"] == "M_sun" and units["X"] == "" and units["Z"] == ""
        assert int(a["burn"]) == summary["sampler"]["burn"] and int(a["thin"]) == summary["sampler"]["thin"]
        assert int(a["seed"]) == 7 and a["star_id"] == "HD chain-test"
        assert json.loads(a["stages"])["profile"] == "polytrope"
        versions = json.loads(a["versions"])
        assert versions["radwalk"] and versions["h5py"] == h5py.__version__ and versions["numpy"] == np.__version__
        assert f["chain"].shape == (summary["sampler"]["steps"], 16, len(names))
        assert "chain[burn::thin]" in a["layout"]


def test_derived_samples_are_those_the_summary_was_computed_on(fitted):
    path, summary = fitted
    data = read_chain(path)
    derived = data["derived"]
    n = data["derived_parameters"].shape[0]
    assert 0 < n <= summary["sampler"]["derived_samples"]
    for name in ("diffusion_time", "energy_transport_time", "kelvin_helmholtz_time", "radius"):
        assert derived[name].shape == (n,)
        assert data["derived_units"][name] == summary["derived"][name]["unit"]
        # the same samples: their percentiles are the summary's, to rounding
        p16, p50, p84 = np.percentile(derived[name][np.isfinite(derived[name])], [16, 50, 84])
        s = summary["derived"][name]
        assert (p16, p50, p84) == pytest.approx((s["p16"], s["p50"], s["p84"]), rel=1e-12)
    # every row's parameters are a posterior sample of the chain (the sampled columns; n drawn from its prior)
    ndim = len(data["names"])
    assert data["derived_names"][:ndim] == data["names"] and "n" in data["derived_names"][ndim:]
    kept = {tuple(row) for row in data["samples"]}
    assert all(tuple(row) in kept for row in data["derived_parameters"][:, :ndim])
    # a function of the posterior without re-running: the ratio of the thermal to the photon time, which
    # exceeds 1 in every star (photons are absorbed and re-emitted; energy leaves on the thermal time; common
    # practice, no source)
    ratio = derived["energy_transport_time"] / derived["diffusion_time"]
    assert np.all(ratio[np.isfinite(ratio)] > 1.0)


def test_arviz_conversion(fitted):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)  # arviz 0.2x announces its coming refactor on import
        arviz = pytest.importorskip("arviz", exc_type=ImportError)  # the radwalk[arviz] extra
    path, _ = fitted
    data = read_chain(path)
    idata = to_arviz(path)
    assert isinstance(idata, arviz.InferenceData)
    mass = idata.posterior["mass"].values  # [walker, draw]
    kept = data["chain"][data["burn"]::data["thin"], :, data["names"].index("mass")]
    np.testing.assert_array_equal(mass, kept.T)
    assert idata.posterior.attrs["star_id"] == "HD chain-test" and idata.posterior.attrs["seed"] == 7
    np.testing.assert_array_equal(idata.sample_stats["lp"].values, data["log_prob"][data["burn"]::data["thin"]].T)
    assert idata.constant_data["g_bf"].values.tolist() == [1.0]  # the fixed values ride along
