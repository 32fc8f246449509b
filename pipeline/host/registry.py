"""The plugin manager: finds components and picks one per stage by name.

Sources, in order: the built-in modules in :mod:`plugins`, installed packages
that declare an entry point in the ``radwalk.plugins`` group, and plugin files
given by path (``--plugin FILE``).
"""

from __future__ import annotations

import difflib
import hashlib
import importlib
import importlib.util
import sys
import traceback
from dataclasses import dataclass
from pathlib import Path

import pluggy

from radwalk.errors import ConfigError, PluginError
from radwalk.host import hookspecs
from radwalk.host.stages import BY_NAME, HOOKS, STAGES

ENTRY_POINT_GROUP = "radwalk.plugins"
BUILTIN_MODULES = (
    "radwalk.plugins.profiles",
    "radwalk.plugins.opacity",
    "radwalk.plugins.tabulated",
    "radwalk.plugins.relations",
    "radwalk.plugins.likelihoods",
    "radwalk.plugins.structure",
    "radwalk.plugins.track_grid",
)

@dataclass(frozen=True)
class Entry:
    """A registered component and where it came from."""

    stage: str
    component: object
    source: str  # "built-in", "entry point <name> (<dist>)", or "file <path>"

    @property
    def name(self) -> str:
        return self.component.name


def suggest(word: str, choices) -> str:
    """' (did you mean X?)' for the closest choice, or ''."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def load_module_from_file(path: str | Path):
    """Imports a plugin file by path under a stable, unique module name.

    The module is put in ``sys.modules`` so that components defined in it
    pickle by reference in this process.
    """
    path = Path(path).expanduser().resolve()
    if not path.is_file():
        raise PluginError(f"plugin file {path} does not exist", plugin=str(path))
    digest = hashlib.sha1(str(path).encode()).hexdigest()[:10]
    modname = f"radwalk_userplugin_{path.stem}_{digest}"
    if modname in sys.modules:
        return sys.modules[modname]
    spec = importlib.util.spec_from_file_location(modname, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[modname] = module
    try:
        spec.loader.exec_module(module)
    except SyntaxError as exc:
        del sys.modules[modname]
        raise PluginError(
            f"plugin file {path} has a syntax error at line {exc.lineno}: {exc.msg}", plugin=str(path)
        ) from None
    except Exception as exc:  # noqa: BLE001 - any import failure is the plugin's
        del sys.modules[modname]
        tb = traceback.extract_tb(exc.__traceback__)
        frames = [f for f in tb if Path(f.filename).resolve() == path] or tb[-1:]
        line = frames[-1].lineno if frames else "?"
        raise PluginError(
            f"plugin file {path} failed to import at line {line}: {type(exc).__name__}: {exc}",
            plugin=str(path),
        ) from None
    return module


def hook_components(returned, hook: str, source: str) -> list:
    """What a provider hook returned, as a list of components; PluginError if it is not a list of instances.

    A hook returns a list (or tuple) of component instances.  Returning the component itself, or its class,
    is the usual slip; it is named here (plugin, hook and what came back) instead of surfacing as a traceback.
    """
    def what(thing) -> str:
        if isinstance(thing, type):
            return f"the class {thing.__name__}"
        return f"a {type(thing).__name__} object" + (f" ({thing.name!r})" if isinstance(getattr(thing, "name", None),
                                                                                      str) else "")

    if not isinstance(returned, (list, tuple)):
        name = returned.__name__ if isinstance(returned, type) else type(returned).__name__
        fix = f"return a list, e.g. [{name}()]"
        raise PluginError(f"{source}: hook {hook} returned {what(returned)}, not a list of components; {fix}",
                          plugin=source)
    for comp in returned:
        if isinstance(comp, type):
            raise PluginError(f"{source}: hook {hook} returned {what(comp)} in its list, not an instance; "
                              f"return [{comp.__name__}()]", plugin=source)
    return list(returned)


class Registry:
    """All known components, by stage and name."""

    def __init__(self, plugin_files=(), entry_points: bool = True):
        self.pm = pluggy.PluginManager(hookspecs.PROJECT)
        self.pm.add_hookspecs(hookspecs)
        self.plugin_files = tuple(str(Path(p).expanduser().resolve()) for p in plugin_files)
        self._sources: dict[object, str] = {}
        self.entries: dict[str, dict[str, Entry]] = {s: {} for s in STAGES}
        for modname in BUILTIN_MODULES:
            self._register(importlib.import_module(modname), "built-in")
        if entry_points:
            self._load_entry_points()
        for path in self.plugin_files:
            self._register(load_module_from_file(path), f"file {path}")
        self._collect()

    # -- loading ---------------------------------------------------------
    def _register(self, module, source: str):
        if self.pm.is_registered(module):
            return
        # A misspelled hook would otherwise be reported by pluggy without a suggestion.
        known = [h for h in dir(hookspecs) if h.startswith("radwalk_")]
        unknown = [n for n in dir(module) if n.startswith("radwalk_") and callable(getattr(module, n))
                   and n not in known]
        if unknown:
            raise PluginError(
                f"{source}: unknown hook {unknown[0]!r}{suggest(unknown[0], known)}; "
                f"known hooks: {', '.join(sorted(known))}",
                plugin=source,
            )
        try:
            self.pm.register(module)
            self.pm.check_pending()
        except pluggy.PluginValidationError as exc:
            self.pm.unregister(module)
            raise PluginError(f"{source}: {exc}", plugin=source) from None
        self._sources[module] = source

    def _load_entry_points(self):
        from importlib.metadata import entry_points

        for ep in entry_points(group=ENTRY_POINT_GROUP):
            dist = getattr(ep, "dist", None)
            label = f"entry point {ep.name}" + (f" ({dist.name} {dist.version})" if dist else "")
            try:
                module = ep.load()
            except Exception as exc:  # noqa: BLE001
                raise PluginError(f"{label} failed to load: {type(exc).__name__}: {exc}", plugin=label) from None
            self._register(module, label)

    def _collect(self):
        for stage, hook in HOOKS.items():
            caller = getattr(self.pm.hook, hook)
            for impl in caller.get_hookimpls():
                source = self._sources.get(impl.plugin, "unknown")
                try:
                    components = impl.function() or []
                except Exception as exc:  # noqa: BLE001
                    raise PluginError(
                        f"{source}: hook {hook} failed: {type(exc).__name__}: {exc}", plugin=source
                    ) from None
                for comp in hook_components(components, hook, source):
                    self._add(stage, comp, source)

    def _add(self, stage: str, comp, source: str):
        missing = [a for a in ("name", "description", "params", "validity") if not hasattr(comp, a)]
        method = BY_NAME[stage].method
        if not callable(getattr(comp, method, None)):
            missing.append(f"method {method}()")
        if missing:
            label = getattr(comp, "name", type(comp).__name__)
            raise PluginError(
                f"{source}: {stage} component {label!r} is missing {', '.join(missing)}", plugin=source
            )
        name = comp.name
        if name in self.entries[stage]:
            other = self.entries[stage][name].source
            raise PluginError(
                f"duplicate {stage} component name {name!r}: from {other} and from {source}",
                plugin=source,
            )
        for p in comp.params:
            object.__setattr__(p, "owner", f"{stage} {name!r}")
        self.entries[stage][name] = Entry(stage, comp, source)

    # -- lookup ----------------------------------------------------------
    def names(self, stage: str) -> list[str]:
        return list(self.entries[stage])

    def get(self, stage: str, name: str):
        """The component called ``name`` in ``stage``, or a ConfigError listing the choices."""
        if stage not in self.entries:
            raise ConfigError(f"unknown stage {stage!r}; stages: {', '.join(STAGES)}")
        try:
            return self.entries[stage][name].component
        except KeyError:
            raise ConfigError(
                f"unknown {stage} component {name!r}{suggest(name, self.entries[stage])}; "
                f"available: {', '.join(self.entries[stage])}"
            ) from None

    def derived_hooks(self):
        return self.pm.hook.radwalk_derived_quantities

    def describe(self) -> dict:
        """Everything registered, as plain data (for ``radwalk plugins --json``)."""
        out = {}
        for stage in STAGES:
            out[stage] = [
                {
                    "name": e.name,
                    "source": e.source,
                    "description": e.component.description,
                    "validity": e.component.validity.describe(),
                    "params": [p.to_dict() for p in e.component.params],
                    "options": [o.to_dict() for o in getattr(e.component, "options", ())],
                }
                for e in self.entries[stage].values()
            ]
        return out
