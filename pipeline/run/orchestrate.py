"""Catalog runs: every star of a catalog through the per-star task, resumable, on a local pool or Dask.

The output folder's layout is :mod:`radwalk.results.layout`; resume and the
state file are :mod:`radwalk.run.state`; the local and Dask executors are
:mod:`radwalk.run.executors`.  Because the per-star task is a pure function
of (star, config, seed), a resumed run's summary equals that of an
uninterrupted run.  ``force`` recomputes every star of the catalog (it
rewrites stars/ entries, a star's earlier figures among them, and never
deletes anything else).

A run fits and stores every star first (chain files and summary.json, which
marks the star done) and only then draws the per-star figures, in the same
pool (:mod:`radwalk.run.star_figures`): the results of the last star do not
wait for the figures of the first, and a run with ``plots=False`` (``radwalk
run --no-plots``) draws none.  A stored star without its figures, from such a
run or one stopped while drawing, gets them from the next run, without being
fitted again.

On a real cluster, start a scheduler and workers with dask's own commands
(``dask scheduler`` on one machine, ``dask worker tcp://HOST:8786
--nthreads 1`` on each), put DIR on a file system every machine shares, and
run ``radwalk run CATALOG --out DIR --executor dask --scheduler
tcp://HOST:8786``.  Stars then write their folders directly; without a
shared folder only their summary.json (from the returned result) reaches DIR.
"""

from __future__ import annotations

import logging
import math
import os
import signal
import sys
import time
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from radwalk.errors import (
    CatalogError,
    ConfigError,
    EnvironmentProblem,
    RadwalkError,
    ValidityWarning,
    environment_cause,
)
from radwalk.host.config import RunConfig, to_toml
from radwalk.results.document import document, read_document, result_document
from radwalk.results.files import remove_leftovers, write_json, write_table, write_text
from radwalk.results.layout import (
    LOG_FILE,
    REPORT_DIR,
    RUN_TOML,
    STAR_SUMMARY,
    STARS_DIR,
    STATE_FILE,
    SUMMARY_ECSV,
    SUMMARY_FITS,
    safe_folder_name,
    star_folder,
)
from radwalk.results.provenance import package_versions
from radwalk.run.catalog import Catalog, CatalogEntry, read_catalog
from radwalk.run.executors import make_executor, require_dask
from radwalk.run.lock import folder_lock
from radwalk.run.star_figures import needs_figures
from radwalk.run.state import check_state, load_done, new_state, now, plugin_hashes, prepare_output, summary_docs

PROVENANCE_PACKAGES = ("numpy", "scipy", "emcee", "astropy", "h5py", "matplotlib", "dask", "distributed")
LOG = logging.getLogger("radwalk.run")


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
    drawn: int = 0  # stars whose figures this run drew
    undrawn: int = 0  # fitted stars left without figures (skipped, or drawing failed)
    seconds: float = 0.0
    notices: list = field(default_factory=list)
    report: Path | None = None
    report_message: str = ""

    def line(self) -> str:
        parts = [f"{self.ok} ok", f"{self.not_converged} not converged", f"{self.failed} failed"]
        extra = f" ({self.resumed} done earlier)" if self.resumed else ""
        if self.undrawn:
            extra += f"; {self.undrawn} without figures"
        return f"{self.stars} stars: {', '.join(parts)}{extra}, in {_duration(self.seconds)}"


# -- small helpers -----------------------------------------------------------
def _duration(seconds: float) -> str:
    seconds = max(0.0, float(seconds))
    if seconds < 90:
        return f"{seconds:.1f} s"
    m, s = divmod(int(round(seconds)), 60)
    h, m = divmod(m, 60)
    return f"{h}h{m:02d}m{s:02d}s" if h else f"{m}m{s:02d}s"


def catalog_failure_doc(entry: CatalogEntry, catalog: Catalog, config: RunConfig) -> dict:
    """summary.json of a row the catalog reader could not use."""
    obs = catalog.observed[entry.row]
    feh = obs.get("feh", (math.nan, math.nan))
    return document(entry.id, "failed", entry.error or "unusable catalog row",
                    {key: obs[key] for key in ("radius", "luminosity", "teff")},
                    feh if any(math.isfinite(x) for x in feh) else None, config.seed, 0.0,
                    catalog_row=entry.row + 1)


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


def sampling_costs(config: RunConfig) -> list[str]:
    """What sampling each law's opacity parameters costs (:func:`radwalk.inference.cost.opacity_sampling_cost`):
    one line per law whose parameters the run samples, as ``radwalk fit`` prints before its fit."""
    from radwalk.host.config import refuse_sampled_opacity
    from radwalk.inference.cost import opacity_sampling_cost
    from radwalk.inference.fit import stages_for

    lines = []
    for op in config.opacity_names():
        stages = stages_for(config, op)
        sampled = refuse_sampled_opacity(config, stages)
        if sampled:
            lines.append(opacity_sampling_cost(config, stages, sampled))
    return lines


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
    if doc.get("status") != "failed":  # a law that could not fit a star the others fitted (its reason names it)
        laws = doc.get("comparison") if isinstance(doc.get("comparison"), dict) else {}
        failed = [" ".join(str(c.get("reason") or "").split()) for c in laws.values()
                  if isinstance(c, dict) and c.get("status") == "failed"]
        reason = "; ".join(x for x in (reason, *failed) if x)
    secs = doc.get("seconds", 0.0) if seconds is None else seconds
    LOG.info("star %r %s %.1f s%s%s", doc.get("id"), doc.get("status"), float(secs or 0.0),
             f" ({note})" if note else "", f": {reason}" if reason else "")


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
        No progress.  Otherwise bars on stderr when it is a terminal; elsewhere (a log file, a pipe, a
        notebook's captured stream) the run's log lines on stderr instead, with no carriage-return frames.
    plots : bool
        Draw the per-star PNGs once every star is fitted and stored (also those a stopped or
        ``plots=False`` run left out); off, none is drawn and the report says so.

    Returns
    -------
    RunOutcome
    """
    from radwalk.run.log_lines import plain_lines, stderr_is_terminal

    if quiet or stderr_is_terminal():
        return _run_catalog(catalog_path, out_dir, config, executor, workers, scheduler, force, report, quiet,
                            plots, echo=True)
    with plain_lines(LOG.name):  # a bar's frames would pile up into one line: the per-star lines instead
        return _run_catalog(catalog_path, out_dir, config, executor, workers, scheduler, force, report, True,
                            plots, echo=False)


def _run_catalog(catalog_path, out_dir, config, executor, workers, scheduler, force, report, quiet, plots,
                 echo: bool) -> RunOutcome:
    """run_catalog with its progress chosen: bars unless ``quiet``; ``echo``: no handler copies the log
    lines to stderr, so the few that must be seen before the stars start are printed there too."""
    t0 = time.perf_counter()
    started = now()
    catalog = read_catalog(catalog_path, config.columns)
    hashes = plugin_hashes(config)
    workers = int(workers or os.cpu_count() or 1)
    if workers < 1:
        raise ConfigError(f"--workers must be at least 1, got {workers}")
    if executor not in ("local", "dask"):
        raise ConfigError(f"unknown executor {executor!r}; choose local or dask")
    if scheduler and executor != "dask":
        raise ConfigError("--scheduler needs --executor dask")
    if executor == "dask":
        require_dask()  # an optional extra: say so before any output folder is made
    folders = {}
    for e in catalog:
        name = safe_folder_name(e.id)
        if name.lower() in folders:  # case-insensitive file systems
            raise CatalogError(f"star ids {folders[name.lower()]!r} and {e.id!r} map to the same folder {name!r}")
        folders[name.lower()] = e.id

    # A named scheduler is asked first: one that does not answer leaves no output folder behind.
    ex = make_executor(executor, workers, scheduler, config, hashes) if scheduler else None
    try:
        out = prepare_output(out_dir, force)
        with folder_lock(out), _sigterm_interrupts():
            return _run_locked(catalog, out, config, hashes, executor, workers, scheduler, force, report, quiet,
                               plots, t0, started, ex, echo=echo)
    except BaseException:
        if ex is not None:
            ex.close(cancel=True)
        raise


class Terminated(KeyboardInterrupt):
    """SIGTERM (what batch schedulers send) stopped the run; handled like Ctrl-C."""


@contextmanager
def _sigterm_interrupts():
    """SIGTERM raises :class:`Terminated` in the run (main thread only) so it stops as Ctrl-C does."""
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def handler(signum, frame):
        raise Terminated()

    previous = signal.signal(signal.SIGTERM, handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _run_locked(catalog, out, config, hashes, executor, workers, scheduler, force, report, quiet, plots, t0, started,
                ex=None, echo=False):
    """run_catalog's work once it holds the output folder's lock (``ex``: an executor already connected).

    ``echo``: the lines that must be seen before the stars start (the cost of sampling an opacity
    parameter) are also printed on stderr, where no handler copies the log there."""
    # a killed run's half-written files: nothing else writes here while the lock is held
    for folder in (out, out / REPORT_DIR, *(p for p in (out / STARS_DIR).iterdir() if p.is_dir())):
        remove_leftovers(folder)
    state = new_state(catalog, config, hashes)
    old = check_state(out, state, force)
    if old and not force:
        state["first_started"] = old.get("first_started", state["first_started"])
    outcome_notes = list(catalog.notices)
    todo, undrawn = [], []  # stars to fit; stored stars still without their figures
    for e in catalog:
        if e.star is None:
            continue
        doc = None if force else load_done(star_folder(out, e.id), e.star, config)
        if doc is None:
            todo.append(e)
        elif plots and needs_figures(star_folder(out, e.id), doc):
            undrawn.append(e)
    if not scheduler:  # processes this machine starts: no more than its cores, nor than stars to compute
        workers, note = capped_workers(workers, len(todo) + len(undrawn))
        if note:
            outcome_notes.append(note)
    # The executor starts before any file is written, so an unanswering scheduler changes nothing; and before
    # the config check, so that its workers start (and import) while this process checks.
    if ex is None and (todo or undrawn):
        ex = make_executor(executor, workers, scheduler, config, hashes if executor == "dask" else {})
    elif ex is not None and not (todo or undrawn):
        ex.close()
        ex = None
    try:
        components = check_config(config)
        costs = sampling_costs(config)
    except BaseException:
        if ex is not None:
            ex.close(cancel=True)
        raise
    cancel = True
    outcome = RunOutcome(out, out / SUMMARY_ECSV, out / SUMMARY_FITS, out / RUN_TOML,
                         stars=len(catalog), notices=outcome_notes)
    handler = None
    try:
        if force:  # every star is recomputed: a killed forced run must not resume from old results
            for e in catalog:
                (star_folder(out, e.id) / STAR_SUMMARY).unlink(missing_ok=True)
        write_json(out / STATE_FILE, state)
        handler = _setup_log(out)
        LOG.info("run of %s (%d stars, sha256 %s) into %s; executor %s, %d worker(s), seed %d%s",
                 catalog.path, len(catalog), catalog.fingerprint[:12], out, executor, workers, config.seed,
                 ", forced" if force else "")
        for note in outcome_notes:
            LOG.info("notice: %s", note)
        for line in costs if todo else ():  # before the first star starts, once per run
            LOG.info("%s", line)
            if echo:
                print(f"radwalk: {line}", file=sys.stderr, flush=True)
        waiting = {e.row for e in todo}
        for e in catalog:
            if e.star is None:
                folder = star_folder(out, e.id)
                folder.mkdir(parents=True, exist_ok=True)
                doc = catalog_failure_doc(e, catalog, config)
                write_json(folder / STAR_SUMMARY, doc)
                outcome.failed += 1
                _log_star(doc)
            elif e.row not in waiting:
                outcome.resumed += 1
                _count(outcome, load_done(star_folder(out, e.id), e.star, config)["status"])
        if todo:  # every star is fitted and stored before any figure is drawn
            _compute(ex, todo, out, config, hashes if executor == "dask" else None, quiet, outcome)
        fitted = {e.row for e in todo}
        if plots:
            draw = [e for e in catalog if e.row in fitted and needs_figures(
                star_folder(out, e.id), read_document(star_folder(out, e.id) / STAR_SUMMARY))] + undrawn
            if draw:
                # the fits' table now; rewritten once the figures add their notes
                _write_summary(out, catalog, config.opacity_names())
                _draw(ex, sorted(draw, key=lambda e: e.row), out, config,
                      hashes if executor == "dask" else None, quiet, outcome)
        cancel = False
    except KeyboardInterrupt as exc:
        if handler is not None:
            how = " (SIGTERM)" if isinstance(exc, Terminated) else ""
            LOG.warning("interrupted%s; run the same command again to resume", how)
        raise
    except (EnvironmentProblem, OSError, MemoryError) as exc:
        problem = _environment_stop(exc, handler is not None)
        if problem is None:
            raise
        raise problem from None
    except RadwalkError as exc:  # the executor stopped the run (no Dask worker left, say): in the log too
        if handler is not None:
            LOG.error("stopped: %s", exc)
        raise
    finally:
        if ex is not None:
            ex.close(cancel=cancel)
        if cancel and handler is not None:
            LOG.removeHandler(handler)
            handler.close()
    try:
        for e in catalog:
            folder = star_folder(out, e.id)
            if e.star is not None and needs_figures(folder, read_document(folder / STAR_SUMMARY)):
                outcome.undrawn += 1
        if outcome.undrawn:
            LOG.info("%d fitted star(s) without figures%s", outcome.undrawn,
                     "" if plots else " (figures off in this run; a run with them on draws them)")
        table = _write_summary(out, catalog, config.opacity_names())
        finished = now()
        provenance = {
            **package_versions(PROVENANCE_PACKAGES), "seed": config.seed, "catalog": str(catalog.path),
            "catalog_sha256": catalog.fingerprint,
            "config_sha256": state["config_sha256"], "plugins": list(hashes),
            "plugin_sha256": list(hashes.values()), "executor": executor, "workers": workers,
            "first_started": state["first_started"], "started": started, "finished": finished,
            "resumed_stars": outcome.resumed,  # stars an earlier run had done: 0 for a fresh run (the report)
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
    except (OSError, MemoryError) as exc:
        problem = _environment_stop(exc, True)
        if problem is None:
            raise
        raise problem from None
    finally:
        LOG.removeHandler(handler)
        handler.close()
    return outcome


def _environment_stop(exc: BaseException, logged: bool) -> EnvironmentProblem | None:
    """The one-line error that stops a run the machine failed (no space, I/O, memory), logged; None otherwise.

    The stars it stopped were not marked done, so the same command resumes them.
    """
    cause = environment_cause(exc)
    if cause is None:
        return None
    message = (f"stopped: {cause}; no star was marked done because of it: fix the cause (free space, ...) and "
               "run the same command again to resume")
    if logged:
        LOG.error(message)
    return EnvironmentProblem(message)


def capped_workers(requested: int, stars: int) -> tuple[int, str]:
    """Worker processes to start on this machine, and a notice when the request was cut to its cores.

    More processes than cores only share them (each star's fit is one CPU-bound process), and more
    than stars to compute sit idle; ``--workers 1000`` once started one process per star.
    """
    cores = os.cpu_count() or 1
    n = max(1, min(int(requested), cores, max(1, int(stars))))
    note = (f"--workers {requested} is more than this machine's {cores} cores; {min(int(requested), cores)} "
            "started") if requested > cores else ""
    return n, note


def _count(outcome: RunOutcome, status: str):
    if status == "ok":
        outcome.ok += 1
    elif status == "not-converged":
        outcome.not_converged += 1
    else:
        outcome.failed += 1


def _compute(ex, todo, out, config, hashes, quiet, outcome):
    from tqdm import tqdm

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
                pending[ex.submit(e.star, config, str(star_folder(out, e.id)), False, hashes)] = e
            done, _ = ex.wait(set(pending))
            for fut in done:
                e = pending.pop(fut)
                result = ex.result(fut)
                folder = star_folder(out, e.id)
                doc = load_done(folder, e.star, config)
                if doc is None:  # a worker without the shared folder: keep what it returned
                    doc = result_document(e.star, config, result)
                    write_json(folder / STAR_SUMMARY, doc)
                outcome.computed += 1
                done_count += 1
                _count(outcome, result.status)
                _log_star(doc, result.seconds)
                bar.update(1)
                bar.set_postfix(done=done_count, failed=outcome.failed)
    finally:
        bar.close()


def _draw(ex, stars, out, config, hashes, quiet, outcome):
    """Draws the figures of stored stars on the executor, a bounded window of them at a time."""
    from tqdm import tqdm

    from radwalk.run.executors import _figures_task

    bar = tqdm(total=len(stars), unit="star", desc="figures", file=sys.stderr, disable=quiet, dynamic_ncols=True)
    window = max(4, 2 * ex.slots)
    queue = list(reversed(stars))
    pending: dict = {}
    try:
        while queue or pending:
            while queue and len(pending) < window:
                e = queue.pop()
                pending[ex.submit(e.star, config, str(star_folder(out, e.id)), hashes, task=_figures_task)] = e
            done, _ = ex.wait(set(pending))
            for fut in done:
                e = pending.pop(fut)
                result = ex.result(fut)
                folder = star_folder(out, e.id)
                if result.plots and needs_figures(folder, read_document(folder / STAR_SUMMARY)):
                    LOG.warning("figures of star %r were drawn where this machine does not see them (a Dask "
                                "worker without the shared run folder)", e.id)
                elif result.plots:
                    outcome.drawn += 1
                    LOG.info("figures of star %r: %d drawn in %.1f s", e.id, len(result.plots), result.seconds)
                else:
                    LOG.warning("figures of star %r not drawn: %s", e.id, " ".join(result.error.split()))
                bar.update(1)
    finally:
        bar.close()


def _write_summary(out: Path, catalog: Catalog, laws: tuple = ()):
    from radwalk.results.table import build_summary_table, fits_safe

    table = build_summary_table(summary_docs(out, catalog), laws)
    table.meta["catalog"] = str(catalog.path)
    table.meta["catalog_sha256"] = catalog.fingerprint
    write_table(table, out / SUMMARY_ECSV)
    write_table(fits_safe(table), out / SUMMARY_FITS)
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


def load_run_config(path) -> RunConfig:
    """A run config from TOML (a run's own run.toml works too: its [provenance] is ignored)."""
    from radwalk.host.config import load

    return load(path)
