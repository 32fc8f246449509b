"""Executors of a catalog run: a local process pool or a Dask cluster, and the per-star task they run.

``local``
    A process pool (``concurrent.futures.ProcessPoolExecutor``) with the
    "spawn" start method; on Linux each worker asks the kernel to kill it
    when the run dies, so a SIGKILLed run leaves no worker writing on.
    A script that calls :func:`radwalk.run.orchestrate.run_catalog` needs the
    usual ``if __name__ == "__main__":`` guard, as with any spawned pool.
``dask``
    A ``dask.distributed`` Client on ``scheduler``, or a LocalCluster whose
    scheduler and workers listen on 127.0.0.1 only, without a dashboard.
    Plugin files are uploaded to the workers (``Client.upload_file``, stored
    under their content hash); a worker that cannot see the original path,
    or sees a different file there, loads the uploaded copy.

This is the only module that imports ``distributed``.  Every executor offers
``slots``, ``submit(star, config, folder, plots, hashes)`` (the per-star task; ``task=_figures_task`` with
``(star, config, folder, hashes)`` draws a stored star's figures instead), ``wait(pending)`` -> (done, rest),
``result(future)`` and ``close(cancel)``.
"""

from __future__ import annotations

import concurrent.futures as cf
import logging
import multiprocessing as mp
import os
import shutil
import signal
import sys
import tempfile
import time
from pathlib import Path

from radwalk.errors import ConfigError, PluginError, RadwalkError
from radwalk.host.config import RunConfig
from radwalk.run.state import file_sha

DASK_CONNECT_TIMEOUT_S = 5
# A run stops when the scheduler has had no worker for this long: a nanny restarts a killed worker in
# seconds and a batch system may take a minute to replace one; longer means every worker is gone.
NO_WORKERS_GRACE_S = 120.0
_POLL_S = 1.0  # how often a waiting run asks the scheduler how many workers it has


DASK_EXTRA = "radwalk[dask]"


def require_dask():
    """Imports ``distributed``, or says which extra to install.

    Raises
    ------
    ConfigError
        When Dask is not installed (it is an optional extra) or cannot be imported.
    """
    try:
        import distributed  # noqa: F401
    except ImportError as exc:
        raise ConfigError(f"--executor dask needs Dask, an optional extra that is not installed here: "
                          f"pip install '{DASK_EXTRA}' (import failed: {exc})") from None


def _upload_name(sha: str) -> str:
    return f"radwalk_plugin_{sha[:20]}.py"


def worker_plugins(plugins: tuple, hashes: dict) -> tuple:
    """Plugin paths usable on this machine: the original file if it is the same, else the uploaded copy.

    Raises
    ------
    PluginError
        When neither is there.
    """
    out = []
    for p in plugins:
        want = hashes.get(p)
        try:
            if want is None or file_sha(p) == want:
                out.append(p)
                continue
        except OSError:
            pass
        copy = None
        try:
            from distributed import get_worker

            copy = Path(get_worker().local_directory) / _upload_name(want)
        except (ImportError, ValueError):
            copy = None
        if copy is not None and copy.is_file() and file_sha(copy) == want:
            out.append(str(copy))
            continue
        raise PluginError(f"plugin file {p} is not on this worker (nor an uploaded copy of it)", plugin=p)
    return tuple(out)


def _star_task(star, config: RunConfig, folder: str, plots: bool, hashes: dict | None = None):
    """Runs on a worker: the per-star task with the worker's own view of the plugin files."""
    from radwalk.inference.fit import fit_star

    if hashes:
        config = config.with_changes(plugins=worker_plugins(tuple(config.plugins), hashes))
    if folder:  # an earlier fit's figures must not pass for this fit's
        from radwalk.run.star_figures import remove_figures

        remove_figures(folder)
    return fit_star(star, config, outdir=folder, plots=plots)


def _figures_task(star, config: RunConfig, folder: str, hashes: dict | None = None):
    """Runs on a worker: draws a stored star's figures (radwalk.run.star_figures)."""
    from radwalk.run.star_figures import draw_stored_figures

    if hashes:
        config = config.with_changes(plugins=worker_plugins(tuple(config.plugins), hashes))
    return draw_stored_figures(star, config, folder)


def _die_with_parent():
    """Linux: the kernel kills this worker when its parent dies (a SIGKILLed run leaves no orphan).

    An orphan would go on writing its star's folder while a resumed run computes
    the same star there.
    """
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1 = PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        return
    if os.getppid() == 1:  # the parent died before prctl took effect
        os._exit(1)


def warm_worker() -> int:
    """Imports what the per-star task needs (numpy, scipy, astropy, emcee, h5py, numba), so that a worker
    started while the run prepares pays them then, not with its first star; returns the process id.

    Only imports: the stages (which may build a relation grid into the cache folder) are built by the
    run's own process first (:func:`radwalk.run.orchestrate.check_config`), and by the workers after.
    An import that fails here fails again, with its real message, in the star's own task.
    """
    try:
        import radwalk.inference._fused_kernel  # noqa: F401  (numba, the heaviest import)
        import radwalk.inference.fit  # noqa: F401
        import radwalk.run.star_figures  # noqa: F401
    except Exception:  # noqa: BLE001  (the star's task reports it)
        pass
    return os.getpid()


def _pool_init():
    # The parent handles Ctrl-C and SIGTERM (sent to the whole process group by a terminal or a batch
    # scheduler) and stops the pool; workers must not each print a traceback, nor die first and make the
    # run report a dead worker instead of the interruption.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    os.environ.setdefault("MPLBACKEND", "Agg")
    _die_with_parent()
    warm_worker()


def _start_method() -> str:
    # "spawn": a fork of a parent that runs threads (the progress bar's monitor, a Dask client)
    # can deadlock, and under "forkserver" the workers are the fork server's children, which
    # outlives a killed run, so they would not die with it.  A worker spends about 0.9 s of CPU
    # before its first sample (imports, most of it; benchmarks/startup_cost.py), nothing against
    # minutes of stars.
    return "spawn"


class _LocalExecutor:
    name = "local"

    def __init__(self, workers: int):
        self.workers = workers
        ctx = mp.get_context(_start_method())
        self.pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_pool_init)
        self.slots = workers
        # A spawned pool starts a process per submitted task while none is idle: one task per slot starts
        # them all now, so they import (in _pool_init) while the run checks its config, not with their first star.
        self._started = [self.pool.submit(os.getpid) for _ in range(workers)]

    def submit(self, *args, task=_star_task):
        return self.pool.submit(task, *args)

    def wait(self, pending):
        done, rest = cf.wait(pending, return_when=cf.FIRST_COMPLETED)
        return done, set(rest)

    def result(self, fut):
        try:
            return fut.result()
        except cf.process.BrokenProcessPool:
            raise RadwalkError("a worker process died (out of memory or killed?); run the same command again "
                               "to resume") from None

    def close(self, cancel: bool = False):
        if cancel:
            procs = list(getattr(self.pool, "_processes", {}).values())
            self.pool.shutdown(wait=False, cancel_futures=True)
            for p in procs:  # stop the stars in flight now: they are recomputed on resume
                if p.is_alive():
                    p.kill()  # SIGKILL: the workers ignore SIGTERM (see _pool_init)
        else:
            self.pool.shutdown(wait=True)


def local_cluster(workers: int):
    """A Dask LocalCluster listening on 127.0.0.1 only: scheduler, workers, nannies and HTTP servers.

    The scheduler always runs an HTTP server (health and metrics routes, and the
    dashboard when bokeh is installed) that would bind every interface on port
    8787 by default; here it binds a free loopback port and the dashboard is off.
    One thread per worker: parallelism is over stars, in processes.
    """
    require_dask()
    import dask
    from distributed import LocalCluster

    # The workers' statistical profiler samples the running task's stack every 10 ms; a star's fit is mostly
    # Python (the sampler's moves), so the sampling costs it CPU for a dashboard that is off here anyway.  The
    # nannies hand this setting to their workers.
    with dask.config.set({"distributed.worker.profile.enabled": False}):
        return LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                            dashboard_address="127.0.0.1:0", worker_dashboard_address="127.0.0.1:0",
                            scheduler_kwargs={"dashboard": False}, silence_logs=logging.ERROR)


class _DaskExecutor:
    name = "dask"

    def __init__(self, workers: int, scheduler: str | None, config: RunConfig, hashes: dict):
        from distributed import Client

        self.cluster = None
        if scheduler:
            try:
                self.client = Client(scheduler, timeout=f"{DASK_CONNECT_TIMEOUT_S}s")
            except (OSError, TimeoutError, ValueError, TypeError) as exc:
                raise ConfigError(f"no Dask scheduler answered at {scheduler} within {DASK_CONNECT_TIMEOUT_S} s "
                                  f"({type(exc).__name__}: {' '.join(str(exc).split())[:200]})") from None
        else:
            self.cluster = local_cluster(workers)
            self.client = Client(self.cluster)
        self.slots = max(1, sum(self.client.nthreads().values()))
        if hashes:
            self._ship(hashes)
        # each worker imports what a star needs while the run checks its config (kept: a released future
        # would be cancelled)
        self._warming = [self.client.submit(warm_worker, pure=False, workers=[addr], allow_other_workers=False)
                         for addr in self.client.nthreads()]

    def _ship(self, hashes: dict):
        with tempfile.TemporaryDirectory(prefix="radwalk-plugins-") as tmp:
            for path, sha in hashes.items():
                copy = Path(tmp) / _upload_name(sha)
                shutil.copyfile(path, copy)
                self.client.upload_file(str(copy), load=False)

    def submit(self, *args, task=_star_task):
        return self.client.submit(task, *args, pure=False)

    def wait(self, pending):
        """(done, rest) once a star finishes; RadwalkError when the scheduler has had no worker for a while.

        Without that check a run whose every worker died (or was stopped) would wait forever: the
        scheduler keeps the stars queued for workers that never come.
        """
        import asyncio

        from distributed import wait

        alone_since = None
        while True:
            try:
                done, rest = wait(list(pending), timeout=_POLL_S, return_when="FIRST_COMPLETED")
                return set(done), set(rest)
            except (TimeoutError, asyncio.TimeoutError):
                pass
            if self.client.nthreads():
                alone_since = None
                continue
            now = time.monotonic()
            alone_since = alone_since or now
            if now - alone_since >= NO_WORKERS_GRACE_S:
                raise RadwalkError(f"no Dask worker has been connected to the scheduler for "
                                   f"{NO_WORKERS_GRACE_S:g} s, so no star can run; the stars already done stay "
                                   "done: start workers and run the same command again to resume")

    def result(self, fut):
        from distributed import KilledWorker

        try:
            return fut.result()
        except KilledWorker as exc:
            raise RadwalkError(f"a star's Dask worker died every time it was tried ({exc}); run the same "
                               "command again to resume") from None

    def close(self, cancel: bool = False):
        try:
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()


def make_executor(kind: str, workers: int, scheduler: str | None, config: RunConfig, hashes: dict):
    """A started executor of ``kind`` ("local" or "dask"); ConfigError for an unknown kind or a bad pairing."""
    if kind == "local":
        if scheduler:
            raise ConfigError("--scheduler needs --executor dask")
        return _LocalExecutor(workers)
    if kind == "dask":
        require_dask()
        return _DaskExecutor(workers, scheduler, config, hashes)
    raise ConfigError(f"unknown executor {kind!r}; choose local or dask")


def dask_tracks(scheduler: str | None = None):
    """A track runner for :func:`radwalk.forward.model_grid.build_grid` on a Dask cluster.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running scheduler; None starts a LocalCluster on
        127.0.0.1 with ``workers`` processes (:func:`local_cluster`) for the
        build and closes it afterwards.

    Returns
    -------
    callable
        ``runner(fn, tasks, workers)`` yielding ``(key, fn(*args))`` as tracks
        finish.  The opacity law travels to the workers by pickle, so it must
        be importable there (a module-level function or a bound law).

    Raises
    ------
    ConfigError
        When Dask is not installed (:func:`require_dask`).
    """
    require_dask()

    def runner(fn, tasks, workers):
        from distributed import Client, as_completed

        cluster = None
        try:
            if scheduler:
                try:
                    client = Client(scheduler, timeout=f"{DASK_CONNECT_TIMEOUT_S}s")
                except (OSError, TimeoutError, ValueError, TypeError) as exc:
                    raise ConfigError(f"no Dask scheduler answered at {scheduler} within {DASK_CONNECT_TIMEOUT_S} s "
                                      f"({type(exc).__name__}: {' '.join(str(exc).split())[:200]})") from None
            else:
                cluster = local_cluster(max(1, int(workers)))
                client = Client(cluster)
            try:
                futures = {client.submit(fn, *args, pure=False): key for key, args in tasks}
                for fut in as_completed(futures):
                    yield futures[fut], fut.result()
            finally:
                client.close()
        finally:
            if cluster is not None:
                cluster.close()

    return runner
