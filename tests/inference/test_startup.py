"""What a fresh process does once: the opacity probe kept between processes, emcee without scipy.stats (issue 13)."""

import subprocess
import sys
import textwrap

import pytest

from radwalk.errors import PluginError
from radwalk.forward import disk_memo
from radwalk.host.config import RunConfig
from radwalk.inference import fit
from radwalk.inference.fit import _passed_probe_key, check_opacity_contract, registry_for

NAN_LAW = '''
import numpy as np

from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Validity


class Law:
    name = "nan-law"
    description = "NaN above 1e6 K"
    params = ()
    validity = Validity(T=(1e4, 1e8), rho=(1e-8, 1e2))

    def kappa(self, rho, T, X, Z):
        return np.where(np.asarray(T) > 1e6, np.nan, 0.34 + 0 * np.asarray(rho))


@hookimpl
def radwalk_opacities():
    return [Law()]
'''


def test_a_built_in_law_probe_is_kept_and_not_run_again(tmp_path, monkeypatch):
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path))
    law = RunConfig().stage_names(None)["opacity"]
    entry = registry_for(()).entries["opacity"][law]
    key = _passed_probe_key(entry, ())
    assert key is not None
    # options may name a file whose content no key sees (the tabulated law's table): probed every time
    assert _passed_probe_key(entry, (("table", "kappa.ecsv"),)) is None
    check_opacity_contract.cache_clear()
    check_opacity_contract((), law, ())
    assert key in disk_memo.load("opacity-contract")
    # the next process: the kept pass is read, the probe does not run (counted on the real checker)
    calls = []
    import radwalk.host.contracts as contracts

    real = contracts.check_component
    monkeypatch.setattr(contracts, "check_component", lambda *a, **k: calls.append(a) or real(*a, **k))
    check_opacity_contract.cache_clear()
    check_opacity_contract((), law, ())
    assert calls == []
    check_opacity_contract.cache_clear()


def test_a_plugin_law_is_probed_every_time_and_a_failure_never_kept(tmp_path, monkeypatch):
    monkeypatch.setenv("RADWALK_CACHE", str(tmp_path / "cache"))
    path = tmp_path / "nanlaw.py"
    path.write_text(NAN_LAW)
    plugins = (str(path),)
    entry = registry_for(plugins).entries["opacity"]["nan-law"]
    assert _passed_probe_key(entry, ()) is None  # its own imports are seen by no hash
    for _ in range(2):
        check_opacity_contract.cache_clear()
        with pytest.raises(PluginError, match="nan-law"):
            check_opacity_contract(plugins, "nan-law", ())
    assert disk_memo.load("opacity-contract") == {}
    check_opacity_contract.cache_clear()
    fit.registry_for.cache_clear()


@pytest.mark.subprocess
def test_the_sampler_loads_emcee_without_scipy_stats_and_the_kde_move_still_works():
    code = textwrap.dedent('''
        import sys
        import numpy as np
        import radwalk.inference.sampler
        assert "scipy.stats" not in sys.modules, "scipy.stats imported"
        import emcee
        s = emcee.EnsembleSampler(16, 2, lambda t: -0.5 * np.sum(t * t, axis=1), vectorize=True,
                                  moves=emcee.moves.KDEMove())
        s.run_mcmc(np.random.default_rng(1).standard_normal((16, 2)), 20, progress=False)
        from scipy.stats import gaussian_kde
        assert gaussian_kde is sys.modules["scipy.stats"].gaussian_kde
        print("ok")
    ''')
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "ok"
