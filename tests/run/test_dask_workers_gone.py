"""A Dask run whose every worker is gone stops with one line; the stars already done stay done.

A real scheduler on 127.0.0.1 (a LocalCluster without workers) and one real worker process, killed with
SIGKILL part-way through the run.
"""

import os
import signal
import subprocess
import sys
import threading
import time

import pytest
from quick_run import quick_run_toml

from radwalk.errors import RadwalkError
from radwalk.results.layout import star_folder
from radwalk.run import executors
from radwalk.run.orchestrate import load_run_config, run_catalog

FAST_TOML = quick_run_toml()


@pytest.mark.dask
@pytest.mark.subprocess
@pytest.mark.slow
def test_run_stops_when_every_worker_is_gone(tmp_path, monkeypatch):
    from distributed import Client

    monkeypatch.setattr(executors, "NO_WORKERS_GRACE_S", 3.0)  # the default waits longer for a restart
    cat = tmp_path / "cat.csv"
    ids = ["a", "b", "c", "d"]
    cat.write_text("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
                   + "".join(f"{i},{1 + 0.1 * j},0.04,{1 + 0.3 * j},0.05,5772,100\n" for j, i in enumerate(ids)))
    cfg = tmp_path / "fast.toml"
    cfg.write_text(FAST_TOML)
    cluster = executors.local_cluster(0)
    worker = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", cluster.scheduler_address,
                               "--nthreads", "1", "--no-nanny", "--host", "127.0.0.1", "--no-dashboard"],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    out = tmp_path / "out"
    box = {}

    def run():
        try:
            box["outcome"] = run_catalog(cat, out, load_run_config(cfg), executor="dask",
                                         scheduler=cluster.scheduler_address, report=False, plots=False, quiet=True)
        except BaseException as exc:  # noqa: BLE001 - handed to the test thread
            box["error"] = exc

    try:
        with Client(cluster) as c:
            c.wait_for_workers(1, timeout=60)
        t = threading.Thread(target=run, daemon=True)
        t.start()
        deadline = time.monotonic() + 120
        while not (star_folder(out, "a") / "summary.json").exists():
            assert t.is_alive() and time.monotonic() < deadline, box
            time.sleep(0.05)
        os.killpg(worker.pid, signal.SIGKILL)
        worker.wait(10)
        t.join(60)
        assert not t.is_alive(), "the run waits forever with no worker"
    finally:
        if worker.poll() is None:
            os.killpg(worker.pid, signal.SIGKILL)
        cluster.close()
    err = box.get("error")
    assert isinstance(err, RadwalkError), box
    assert "no Dask worker" in str(err) and "resume" in str(err) and "\n" not in str(err)
    assert (star_folder(out, "a") / "summary.json").exists()
    assert "no Dask worker" in (out / "radwalk.log").read_text()
