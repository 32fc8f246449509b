"""Run state and resume: fingerprints of the catalog, config and plugins (state.json), the output folder's
checks, and which stars an earlier run finished.

Running the same command again skips every star whose summary.json is there,
whole, and fingerprinted with the same star values and config (:func:`load_done`),
and computes the rest.  A catalog, config,
plugin file or radwalk version that changed since the first run is refused
unless ``force``.
"""

from __future__ import annotations

import hashlib
import json
import os
import socket
import tempfile
from datetime import datetime, timezone
from functools import lru_cache
from pathlib import Path

from radwalk import __version__
from radwalk.errors import ConfigError, PluginError
from radwalk.host.config import RunConfig
from radwalk.results.document import STATUSES, read_document, star_fingerprint
from radwalk.results.files import strict
from radwalk.results.layout import RUN_FILES, STAR_SUMMARY, STARS_DIR, STATE_FILE, chain_file_name, star_folder
from radwalk.run.catalog import Catalog


def now() -> str:
    """The current UTC time, ISO 8601 to the second (``2026-01-02T03:04:05Z``)."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


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
    # NaN allowed here: this text is hashed, never written, and must match earlier runs' fingerprints
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
    # compared as written: the new config goes through the same strict conversion as state.json
    a, b = _flatten(old or {}), _flatten(strict(new))
    keys = sorted(set(a) | set(b))
    diffs = [f"{key}: {a.get(key, '(unset)')!r} -> {b.get(key, '(unset)')!r}" for key in keys
             if json.dumps(a.get(key)) != json.dumps(b.get(key))]
    more = f"; and {len(diffs) - limit} more" if len(diffs) > limit else ""
    return "; ".join(diffs[:limit]) + more


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
    """The state.json of a run starting now."""
    return {
        "radwalk_version": __version__,
        "catalog": {"path": str(catalog.path), "sha256": catalog.fingerprint, "stars": len(catalog)},
        "config_sha256": config_fingerprint(config),
        "config": config.to_dict(),
        "plugins": plugins,
        "first_started": now(),
        "finished": None,
        # who holds the folder now (radwalk.run.lock quotes it to a second run)
        "run_by": {"pid": os.getpid(), "host": socket.gethostname(), "started": now()},
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


def load_done(folder: Path, star, config: RunConfig) -> dict | None:
    """The star's summary.json if a resumed run may reuse it, else None (the star is computed again).

    Reused only when it is whole and this star's under this config: the id and
    seed match, its ``fingerprint`` equals :func:`radwalk.results.document.star_fingerprint`
    of the star and config (catalog values, config, stages, plugins, version), a
    fitted star's document holds its fit (parameters with medians, derived
    quantities, sampler steps), and each of its chain files opens and holds those steps.
    """
    doc = read_document(folder / STAR_SUMMARY)
    if doc is None or doc.get("id") != star.id or doc.get("status") not in STATUSES:
        return None
    if doc.get("seed") != config.seed or doc.get("fingerprint") != star_fingerprint(star, config):
        return None
    if doc["status"] != "failed" and not _fit_is_whole(folder, doc, config):
        return None
    return doc


def _fit_is_whole(folder: Path, doc: dict, config: RunConfig) -> bool:
    params, derived, sampler = doc.get("parameters"), doc.get("derived"), doc.get("sampler")
    if not (isinstance(params, dict) and params and isinstance(derived, dict) and derived
            and isinstance(sampler, dict)):
        return False
    if not all(isinstance(p, dict) and isinstance(p.get("p50"), (int, float)) for p in params.values()):
        return False
    steps = sampler.get("steps")
    if not isinstance(steps, int) or steps < 1:
        return False
    try:
        import h5py

        for j, op in enumerate(config.opacity_names()):
            with h5py.File(folder / chain_file_name(op, primary=j == 0), "r") as f:
                if f["chain"].shape[0] != steps or f["log_prob"].shape[0] != steps:
                    return False
    except (OSError, KeyError, ValueError):
        return False
    return True


def summary_docs(out: Path, entries):
    """Every star's summary.json in ``entries`` order, each with its ``folder`` name added.

    A star without a readable summary.json gets a failed document saying so.
    """
    for e in entries:
        folder = star_folder(out, e.id)
        doc = read_document(folder / STAR_SUMMARY)
        if doc is None:
            doc = {"id": e.id, "status": "failed", "reason": "no summary.json was written for this star"}
        doc["folder"] = folder.name
        yield doc
