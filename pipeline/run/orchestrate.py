"""Catalog runs: every star of a catalog through the per-star task, resumable, on a local pool or Dask.

The output folder DIR holds::

    summary.ecsv, summary.fits   one row a star, in catalog order (radwalk.results.table)
    stars/<safe-id>/             chain.h5, the PNGs and summary.json (written last: the star is done)
    run.toml                     the resolved config plus a [provenance] table
    radwalk.log                  one line a star: id, status, seconds, reason
    state.json                   fingerprints of the catalog, config and plugins, for resume checks
    report/                      the HTML report (radwalk.report.pages), unless turned off

Running the same command again skips every star whose summary.json is there
(and names the same star) and computes the rest; because the per-star task is
a pure function of (star, config, seed), the final summary equals that of an
uninterrupted run.  A catalog, config, plugin file or radwalk version that
changed since the first run is refused unless ``force``; ``force`` recomputes
every star of the catalog (it rewrites stars/ entries and never deletes
anything else).

Executors
---------
``local``
    A process pool (``concurrent.futures.ProcessPoolExecutor``) with the
    "spawn" start method; on Linux each worker asks the kernel to kill it
    when the run dies, so a SIGKILLed run leaves no worker writing on.
    A script that calls :func:`run_catalog` needs the usual
    ``if __name__ == "__main__":`` guard, as with any spawned pool.
``dask``
    A ``dask.distributed`` Client on ``scheduler``, or a LocalCluster whose
    scheduler and workers listen on 127.0.0.1 only, without a dashboard.
    Plugin files are uploaded to the workers (``Client.upload_file``, stored
    under their content hash); a worker that cannot see the original path,
    or sees a different file there, loads the uploaded copy.

On a real cluster, start a scheduler and workers with dask's own commands
(``dask scheduler`` on one machine, ``dask worker tcp://HOST:8786
--nthreads 1`` on each), put DIR on a file system every machine shares, and
run ``radwalk run CATALOG --out DIR --executor dask --scheduler
tcp://HOST:8786``.  Stars then write their folders directly; without a
shared folder only their summary.json (from the returned result) reaches DIR.
"""

from __future__ import annotations

import concurrent.futures as cf
import hashlib
import json
import logging
import math
import multiprocessing as mp
import os
import shutil
import signal
import sys
import tempfile
import time
import warnings
from dataclasses import dataclass, field
from datetime import datetime, timezone
from functools import lru_cache
from pathlib import Path

from radwalk import __version__
from radwalk.errors import CatalogError, ConfigError, PluginError, RadwalkError, ValidityWarning
from radwalk.host.config import RunConfig, to_toml
from radwalk.inference.star import safe_folder_name
from radwalk.results.files import write_json, write_table, write_text
from radwalk.run.catalog import Catalog, CatalogEntry, read_catalog

STATE_FILE = "state.json"
LOG_FILE = "radwalk.log"
STARS_DIR = "stars"
RUN_FILES = ("summary.ecsv", "summary.fits", "run.toml", LOG_FILE, STATE_FILE, STARS_DIR, "report")
STATUSES = ("ok", "not-converged", "failed")
DASK_CONNECT_TIMEOUT_S = 5
PROVENANCE_PACKAGES = ("numpy", "scipy", "emcee", "astropy", "h5py", "matplotlib", "dask", "distributed")
LOG = logging.getLogger("radwalk.run")

# The demo: catalog, truths and config in demo_catalog/ beside the package.
DEMO_DIR = Path(__file__).resolve().parents[2] / "demo_catalog"


@dataclass
class RunOutcome:
    """What a catalog run did and where it put things."""

    out_dir: Path
    summary_ecsv: Path
    summary_fits: Path
    run_toml: Path
    stars: int = 0
    ok: int = 0
    not_converged: int = 0
    failed: int = 0
    resumed: int = 0  # skipped: done by an earlier run
    computed: int = 0
    seconds: float = 0.0
    notices: list = field(default_factory=list)
    report: Path | None = None
    report_message: str = ""

    def line(self) -> str:
        parts = [f"{self.ok} ok", f"{self.not_converged} not converged", f"{self.failed} failed"]
        extra = f" ({self.resumed} done earlier)" if self.resumed else ""
        return f"{self.stars} stars: {', '.join(parts)}{extra}, in {_duration(self.seconds)}"


# -- small helpers -----------------------------------------------------------
def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def _duration(seconds: float) -> str:
    seconds = max(0.0, float(seconds))
    if seconds < 90:
        return f"{seconds:.1f} s"
    m, s = divmod(int(round(seconds)), 60)
    h, m = divmod(m, 60)
    return f"{h}h{m:02d}m{s:02d}s" if h else f"{m}m{s:02d}s"


def _sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


@lru_cache(maxsize=64)
def _file_sha(path: str, mtime_ns: int, size: int) -> str:
    return _sha256_bytes(Path(path).read_bytes())


def file_sha(path) -> str:
    """sha256 of a (small) file, cached by path, modification time and size."""
    st = os.stat(path)
    return _file_sha(str(path), st.st_mtime_ns, st.st_size)


def config_fingerprint(config: RunConfig) -> str:
    """sha256 of the resolved config as canonical JSON."""
    text = json.dumps(config.to_dict(), sort_keys=True, separators=(",", ":"), allow_nan=True)
    return _sha256_bytes(text.encode())


def plugin_hashes(config: RunConfig) -> dict:
    """Plugin file path -> sha256 of its content (PluginError for a file that is not there)."""
    out = {}
    for p in config.plugins:
        try:
            out[p] = file_sha(p)
        except OSError as exc:
            raise PluginError(f"plugin file {p} cannot be read: {exc.strerror}", plugin=p) from None
    return out


def star_folder(out_dir: Path, star_id: str) -> Path:
    """stars/<safe-id> inside ``out_dir``; never a path outside it."""
    stars = (Path(out_dir) / STARS_DIR).resolve()
    folder = (stars / safe_folder_name(star_id)).resolve()
    if folder.parent != stars:  # cannot happen with safe_folder_name; checked because ids are user text
        raise CatalogError(f"star id {star_id!r} maps outside the output folder")
    return folder


def _versions() -> dict:
    from importlib import metadata

    out = {"radwalk": __version__, "python": sys.version.split()[0]}
    for name in PROVENANCE_PACKAGES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def _flatten(d: dict, prefix: str = "") -> dict:
    out = {}
    for key, v in d.items():
        name = f"{prefix}{key}"
        if isinstance(v, dict):
            out.update(_flatten(v, name + "."))
        else:
            out[name] = v
    return out


def _config_diff(old: dict, new: dict, limit: int = 6) -> str:
    a, b = _flatten(old or {}), _flatten(new)
    keys = sorted(set(a) | set(b))
    diffs = [f"{key}: {a.get(key, '(unset)')!r} -> {b.get(key, '(unset)')!r}" for key in keys
             if json.dumps(a.get(key)) != json.dumps(b.get(key))]
    more = f"; and {len(diffs) - limit} more" if len(diffs) > limit else ""
    return "; ".join(diffs[:limit]) + more


# -- the output folder -------------------------------------------------------
def prepare_output(out_dir, force: bool = False) -> Path:
    """Creates DIR (and DIR/stars) and proves it writable; refuses a folder of other files.

    Raises
    ------
    ConfigError
        When DIR cannot be created or written, or already holds files that are not a
        radwalk run's and ``force`` is not set.  Nothing already there is touched.
    """
    out = Path(out_dir).expanduser().absolute()
    if out.exists() and not out.is_dir():
        raise ConfigError(f"output folder {out} is a file, not a folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"output folder {out} cannot be created: {exc.strerror or exc}") from None
    try:
        fd, probe = tempfile.mkstemp(prefix=".radwalk-probe-", dir=out)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise ConfigError(f"output folder {out} is not writable: {exc.strerror or exc}") from None
    others = sorted(p.name for p in out.iterdir() if p.name not in RUN_FILES and not p.name.startswith("."))
    if others and not (out / STATE_FILE).exists() and not force:
        shown = ", ".join(others[:5]) + (" ..." if len(others) > 5 else "")
        raise ConfigError(
            f"output folder {out} already holds files of something else ({shown}); choose a new or empty "
            "folder, or use --force to write the run's files into it (nothing else there is touched)"
        )
    try:
        (out / STARS_DIR).mkdir(exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"output folder {out} is not writable: {exc.strerror or exc}") from None
    return out


def new_state(catalog: Catalog, config: RunConfig, plugins: dict) -> dict:
    return {
        "radwalk_version": __version__,
        "catalog": {"path": str(catalog.path), "sha256": catalog.fingerprint, "stars": len(catalog)},
        "config_sha256": config_fingerprint(config),
        "config": config.to_dict(),
        "plugins": plugins,
        "first_started": _now(),
        "finished": None,
    }


def check_state(out: Path, state: dict, force: bool) -> dict | None:
    """The earlier run's state, after checking it matches this run's; None when there is none.

    Raises
    ------
    ConfigError
        When the catalog, config, plugins or radwalk version differ and ``force`` is not set.
    """
    path = out / STATE_FILE
    if not path.exists():
        return None
    try:
        old = json.loads(path.read_text())
        if not isinstance(old, dict):
            raise ValueError("not a JSON object")
    except (OSError, ValueError) as exc:
        if force:
            return None
        raise ConfigError(f"{path} cannot be read ({exc}); use --force to start this run afresh") from None
    if force:
        return old
    hint = "; use --force to recompute every star, or choose another --out"
    if old.get("catalog", {}).get("sha256") != state["catalog"]["sha256"]:
        raise ConfigError(
            f"{out} holds a run of a different catalog ({old.get('catalog', {}).get('path')}, sha256 "
            f"{str(old.get('catalog', {}).get('sha256'))[:12]}...; this one is {state['catalog']['sha256'][:12]}...)"
            f"{hint}"
        )
    if old.get("config_sha256") != state["config_sha256"]:
        diff = _config_diff(old.get("config"), state["config"])
        raise ConfigError(f"{out} holds a run with a different config ({diff}){hint}")
    if old.get("plugins") != state["plugins"]:
        changed = sorted(set(old.get("plugins") or {}) ^ set(state["plugins"])) or [
            p for p, h in state["plugins"].items() if (old.get("plugins") or {}).get(p) != h]
        raise ConfigError(f"{out} holds a run with different plugin files (changed: {', '.join(changed)}){hint}")
    if old.get("radwalk_version") != __version__:
        raise ConfigError(f"{out} holds a run made by radwalk {old.get('radwalk_version')}; this is {__version__}"
                          f"{hint}")
    return old


def load_done(folder: Path, star_id: str, seed: int) -> dict | None:
    """The star's summary.json if it is complete and belongs to this star and seed, else None."""
    path = folder / "summary.json"
    try:
        doc = json.loads(path.read_text())
    except (OSError, ValueError):
        return None
    if not isinstance(doc, dict) or doc.get("id") != star_id or doc.get("status") not in STATUSES:
        return None
    if doc.get("seed") != seed:
        return None
    return doc


def catalog_failure_doc(entry: CatalogEntry, catalog: Catalog, config: RunConfig) -> dict:
    """summary.json of a row the catalog reader could not use."""
    obs = catalog.observed[entry.row]
    feh = obs.get("feh", (math.nan, math.nan))
    return {
        "id": entry.id, "status": "failed", "reason": entry.error or "unusable catalog row",
        "observed": {key: {"value": obs[key][0], "error": obs[key][1]} for key in ("radius", "luminosity", "teff")},
        "feh": list(feh) if any(math.isfinite(x) for x in feh) else None,
        "seed": config.seed, "radwalk_version": __version__, "seconds": 0.0,
        "catalog_row": entry.row + 1,
    }


# -- the per-star task and plugin shipping -------------------------------------
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
    return fit_star(star, config, outdir=folder, plots=plots)


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


def _pool_init():
    # The parent handles Ctrl-C and stops the pool; workers must not each print a traceback.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    os.environ.setdefault("MPLBACKEND", "Agg")
    _die_with_parent()


def _start_method() -> str:
    # "spawn": a fork of a parent that runs threads (the progress bar's monitor, a Dask client)
    # can deadlock, and under "forkserver" the workers are the fork server's children, which
    # outlives a killed run, so they would not die with it.  Workers import the package once
    # (about 2 s), nothing against minutes of stars.
    return "spawn"


class _LocalExecutor:
    name = "local"

    def __init__(self, workers: int):
        self.workers = workers
        ctx = mp.get_context(_start_method())
        self.pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_pool_init)
        self.slots = workers

    def submit(self, *args):
        return self.pool.submit(_star_task, *args)

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
                    p.terminate()
        else:
            self.pool.shutdown(wait=True)


def local_cluster(workers: int):
    """A Dask LocalCluster listening on 127.0.0.1 only: scheduler, workers, nannies and HTTP servers.

    The scheduler always runs an HTTP server (health and metrics routes, and the
    dashboard when bokeh is installed) that would bind every interface on port
    8787 by default; here it binds a free loopback port and the dashboard is off.
    One thread per worker: parallelism is over stars, in processes.
    """
    from distributed import LocalCluster

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

    def _ship(self, hashes: dict):
        with tempfile.TemporaryDirectory(prefix="radwalk-plugins-") as tmp:
            for path, sha in hashes.items():
                copy = Path(tmp) / _upload_name(sha)
                shutil.copyfile(path, copy)
                self.client.upload_file(str(copy), load=False)

    def submit(self, *args):
        return self.client.submit(_star_task, *args, pure=False)

    def wait(self, pending):
        from distributed import wait

        done, rest = wait(list(pending), return_when="FIRST_COMPLETED")
        return set(done), set(rest)

    def result(self, fut):
        return fut.result()

    def close(self, cancel: bool = False):
        try:
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()


def make_executor(kind: str, workers: int, scheduler: str | None, config: RunConfig, hashes: dict):
    if kind == "local":
        if scheduler:
            raise ConfigError("--scheduler needs --executor dask")
        return _LocalExecutor(workers)
    if kind == "dask":
        return _DaskExecutor(workers, scheduler, config, hashes)
    raise ConfigError(f"unknown executor {kind!r}; choose local or dask")


# -- checks before any star runs ------------------------------------------------
def check_config(config: RunConfig):
    """Builds the stages and a posterior once here, so a bad config fails once, not per star.

    Also builds (or loads) any relation grid in this process, which workers then read from
    the disk cache instead of each building it.

    Returns
    -------
    dict
        "<stage> <component>" -> where the component came from (built-in, entry point, file).
    """
    import numpy as np

    from radwalk.inference.fit import stages_for
    from radwalk.inference.posterior import Posterior
    from radwalk.inference.star import Star

    probe = Star.from_user_units("config check", 1.0, 0.05, 1.0, 0.05, 5772.0, 100.0)
    used = {}
    for op in config.opacity_names():
        stages = stages_for(config, op)
        for stage, comp in stages.components().items():
            entry = stages.registry.entries[stage][comp.name]
            used.setdefault(f"{stage} {comp.name}", entry.source)
        post = Posterior(stages, probe.observations(), config)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ValidityWarning)
            try:
                post(post.sample_prior(np.random.default_rng(0), 4))
            except RadwalkError:
                pass  # a model problem at random prior points is the stars' business
    return used


# -- the run ----------------------------------------------------------------------
def _setup_log(out: Path) -> logging.Handler:
    handler = logging.FileHandler(out / LOG_FILE, mode="a", encoding="utf-8")
    fmt = logging.Formatter("%(asctime)s %(levelname)s %(message)s", datefmt="%Y-%m-%dT%H:%M:%SZ")
    fmt.converter = time.gmtime
    handler.setFormatter(fmt)
    LOG.addHandler(handler)
    LOG.setLevel(logging.INFO)
    LOG.propagate = False
    return handler


def _log_star(doc: dict, seconds: float | None = None, note: str = ""):
    reason = " ".join(str(doc.get("reason") or "").split())
    secs = doc.get("seconds", 0.0) if seconds is None else seconds
    LOG.info("star %r %s %.1f s%s%s", doc.get("id"), doc.get("status"), float(secs or 0.0),
             f" ({note})" if note else "", f": {reason}" if reason else "")


def _summary_docs(out: Path, entries):
    for e in entries:
        folder = star_folder(out, e.id)
        try:
            doc = json.loads((folder / "summary.json").read_text())
        except (OSError, ValueError):
            doc = {"id": e.id, "status": "failed", "reason": "no summary.json was written for this star"}
        doc["folder"] = folder.name
        yield doc


def write_run_toml(path: Path, config: RunConfig, provenance: dict):
    text = to_toml(config.to_dict()) + "\n\n" + to_toml({"provenance": provenance}) + "\n"
    write_text(path, "# radwalk run: the resolved config and where the results came from\n" + text)


def run_catalog(catalog_path, out_dir, config: RunConfig, executor: str = "local", workers: int | None = None,
                scheduler: str | None = None, force: bool = False, report: bool = True, quiet: bool = False,
                plots: bool = True) -> RunOutcome:
    """Fits every star of a catalog and writes the output folder.

    Parameters
    ----------
    catalog_path : str or Path
        The catalog (see :func:`radwalk.run.catalog.read_catalog`).
    out_dir : str or Path
        DIR; created if needed.
    config : RunConfig
        The resolved run config (plugins as absolute paths).
    executor : {"local", "dask"}
    workers : int, optional
        Worker processes (default: the machine's cores); for Dask, of the LocalCluster.
    scheduler : str, optional
        Address of a running Dask scheduler (executor "dask" only).
    force : bool
        Recompute every star even if done, and accept a changed catalog or config.
    report : bool
        Write the HTML report (radwalk.report.pages) at the end.
    quiet : bool
        No progress bar.
    plots : bool
        Per-star PNGs (the report needs them; off only to save time).

    Returns
    -------
    RunOutcome
    """
    t0 = time.perf_counter()
    started = _now()
    catalog = read_catalog(catalog_path, config.columns)
    hashes = plugin_hashes(config)
    workers = int(workers or os.cpu_count() or 1)
    if workers < 1:
        raise ConfigError(f"--workers must be at least 1, got {workers}")
    if executor not in ("local", "dask"):
        raise ConfigError(f"unknown executor {executor!r}; choose local or dask")
    if scheduler and executor != "dask":
        raise ConfigError("--scheduler needs --executor dask")
    folders = {}
    for e in catalog:
        name = safe_folder_name(e.id)
        if name.lower() in folders:  # case-insensitive file systems
            raise CatalogError(f"star ids {folders[name.lower()]!r} and {e.id!r} map to the same folder {name!r}")
        folders[name.lower()] = e.id

    out = prepare_output(out_dir, force)
    state = new_state(catalog, config, hashes)
    old = check_state(out, state, force)
    if old and not force:
        state["first_started"] = old.get("first_started", state["first_started"])
    components = check_config(config)
    todo = [e for e in catalog if e.star is not None
            and (force or load_done(star_folder(out, e.id), e.id, config.seed) is None)]
    # The executor starts before any file is written, so an unanswering scheduler changes nothing.
    ex = make_executor(executor, workers, scheduler, config, hashes if executor == "dask" else {}) if todo else None
    cancel = True
    outcome = RunOutcome(out, out / "summary.ecsv", out / "summary.fits", out / "run.toml",
                         stars=len(catalog), notices=list(catalog.notices))
    handler = None
    try:
        if force:  # every star is recomputed: a killed forced run must not resume from old results
            for e in catalog:
                (star_folder(out, e.id) / "summary.json").unlink(missing_ok=True)
        write_json(out / STATE_FILE, state)
        handler = _setup_log(out)
        LOG.info("run of %s (%d stars, sha256 %s) into %s; executor %s, %d worker(s), seed %d%s",
                 catalog.path, len(catalog), catalog.fingerprint[:12], out, executor, workers, config.seed,
                 ", forced" if force else "")
        for note in catalog.notices:
            LOG.info("notice: %s", note)
        waiting = {e.row for e in todo}
        for e in catalog:
            if e.star is None:
                folder = star_folder(out, e.id)
                folder.mkdir(parents=True, exist_ok=True)
                doc = catalog_failure_doc(e, catalog, config)
                write_json(folder / "summary.json", doc)
                outcome.failed += 1
                _log_star(doc)
            elif e.row not in waiting:
                outcome.resumed += 1
                _count(outcome, load_done(star_folder(out, e.id), e.id, config.seed)["status"])
        if todo:
            _compute(ex, todo, out, config, hashes if executor == "dask" else None, plots, quiet, outcome)
        cancel = False
    except KeyboardInterrupt:
        if handler is not None:
            LOG.warning("interrupted; run the same command again to resume")
        raise
    finally:
        if ex is not None:
            ex.close(cancel=cancel)
        if cancel and handler is not None:
            LOG.removeHandler(handler)
            handler.close()
    try:
        table = _write_summary(out, catalog)
        finished = _now()
        provenance = {
            **_versions(), "seed": config.seed, "catalog": str(catalog.path), "catalog_sha256": catalog.fingerprint,
            "config_sha256": state["config_sha256"], "plugins": list(hashes),
            "plugin_sha256": list(hashes.values()), "executor": executor, "workers": workers,
            "first_started": state["first_started"], "started": started, "finished": finished,
            "components": components,
        }
        write_run_toml(outcome.run_toml, config, provenance)
        state["finished"] = finished
        state["counts"] = {"ok": outcome.ok, "not-converged": outcome.not_converged, "failed": outcome.failed}
        write_json(out / STATE_FILE, state)
        outcome.seconds = time.perf_counter() - t0
        LOG.info("finished: %s; summary %s (%d rows)", outcome.line(), outcome.summary_ecsv.name, len(table))
        if report:
            _report(out, outcome)
    finally:
        LOG.removeHandler(handler)
        handler.close()
    return outcome


def _count(outcome: RunOutcome, status: str):
    if status == "ok":
        outcome.ok += 1
    elif status == "not-converged":
        outcome.not_converged += 1
    else:
        outcome.failed += 1


def _compute(ex, todo, out, config, hashes, plots, quiet, outcome):
    from tqdm import tqdm

    from radwalk.inference.fit import result_document

    bar = tqdm(total=outcome.stars, initial=outcome.stars - len(todo), unit="star", desc="stars",
               file=sys.stderr, disable=quiet, dynamic_ncols=True, smoothing=0.1)
    done_count = outcome.stars - len(todo)
    bar.set_postfix(done=done_count, failed=outcome.failed)
    window = max(4, 2 * ex.slots)  # bounded: a huge catalog's futures and results are never all held
    queue = list(reversed(todo))
    pending: dict = {}
    try:
        while queue or pending:
            while queue and len(pending) < window:
                e = queue.pop()
                pending[ex.submit(e.star, config, str(star_folder(out, e.id)), plots, hashes)] = e
            done, _ = ex.wait(set(pending))
            for fut in done:
                e = pending.pop(fut)
                result = ex.result(fut)
                folder = star_folder(out, e.id)
                doc = load_done(folder, e.id, config.seed)
                if doc is None:  # a worker without the shared folder: keep what it returned
                    doc = result_document(e.star, config, result)
                    write_json(folder / "summary.json", doc)
                outcome.computed += 1
                done_count += 1
                _count(outcome, result.status)
                _log_star(doc, result.seconds)
                bar.update(1)
                bar.set_postfix(done=done_count, failed=outcome.failed)
    finally:
        bar.close()


def _write_summary(out: Path, catalog: Catalog):
    from radwalk.results.table import build_summary_table, fits_safe

    table = build_summary_table(_summary_docs(out, catalog))
    table.meta["catalog"] = str(catalog.path)
    table.meta["catalog_sha256"] = catalog.fingerprint
    write_table(table, out / "summary.ecsv")
    write_table(fits_safe(table), out / "summary.fits")
    return table


def _report(out: Path, outcome: RunOutcome):
    from radwalk.report.pages import write_report

    try:
        written = write_report(out)
    except RadwalkError as exc:  # the results are written; only the report is missing
        outcome.report_message = f"no HTML report: {exc}"
        LOG.warning(outcome.report_message)
        return
    outcome.report = Path(written)
    LOG.info("report: %s", outcome.report)


# -- the demo ---------------------------------------------------------------------
def demo_paths() -> dict:
    """The demo's catalog, truths and config (CatalogError when they are not beside the package)."""
    paths = {"catalog": DEMO_DIR / "demo_stars.ecsv", "truths": DEMO_DIR / "truths.ecsv",
             "config": DEMO_DIR / "demo.toml"}
    missing = [str(p) for p in paths.values() if not p.is_file()]
    if missing:
        raise CatalogError(f"the demo catalog is not installed here (missing {', '.join(missing)}); run the demo "
                           "from a clone of the project (pip install -e .)")
    return paths


def demo_recovery(out_dir, truths_path, level: float = 0.95, names=("mass", "X", "Z")) -> dict:
    """How often the demo's true parameters lie inside the central credible intervals.

    Only converged stars (status ok) with truths count.

    Returns
    -------
    dict
        ``converged`` (stars counted), ``inside`` (name -> stars whose truth is inside),
        ``all_inside`` (stars with every truth inside), ``outside`` (name -> ids),
        ``stars`` (id -> {name: (lower, upper, truth)}).
    """
    from astropy.table import Table

    from radwalk.results.table import posterior_interval

    out = Path(out_dir)
    truths = Table.read(truths_path)
    by_id = {str(r["id"]): r for r in truths}
    res = {"converged": 0, "inside": dict.fromkeys(names, 0), "all_inside": 0,
           "outside": {n: [] for n in names}, "stars": {}}
    for doc in _summary_docs(out, [CatalogEntry(0, i, None, None) for i in by_id]):
        t = by_id[doc["id"]]
        if doc.get("status") != "ok" or not all(math.isfinite(float(t[n])) for n in names):
            continue
        s = doc["sampler"]
        chain = out / STARS_DIR / doc["folder"] / "chain.h5"
        per = {}
        for n in names:
            lo, hi = posterior_interval(chain, n, level, burn=s["burn"], thin=s["thin"])
            per[n] = (lo, hi, float(t[n]))
            if lo <= float(t[n]) <= hi:
                res["inside"][n] += 1
            else:
                res["outside"][n].append(doc["id"])
        res["converged"] += 1
        res["stars"][doc["id"]] = per
        res["all_inside"] += all(lo <= tv <= hi for lo, hi, tv in per.values())
    return res


def load_run_config(path) -> RunConfig:
    """A run config from TOML (a run's own run.toml works too: its [provenance] is ignored)."""
    from radwalk.host.config import load

    return load(path)
