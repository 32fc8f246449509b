"""What a contract check is run on: a plugin file, a module or a component name; and the run itself."""

from __future__ import annotations

import importlib
import traceback
from pathlib import Path

from radwalk.errors import ConfigError, PluginError, RadwalkError
from radwalk.host.contracts.checks import checks_for
from radwalk.host.contracts.outcome import CheckReport
from radwalk.host.contracts.subject import Subject
from radwalk.host.registry import Entry, Registry, hook_components, suggest
from radwalk.host.stages import HOOKS


class _ModuleRegistry(Registry):
    """A Registry with extra modules registered by import name, after the entry points."""

    def __init__(self, modules, entry_points: bool = True):
        self._extra_modules = tuple(modules)
        self._want_entry_points = entry_points
        super().__init__(entry_points=True)

    def _load_entry_points(self):
        if self._want_entry_points:
            super()._load_entry_points()
        for module in self._extra_modules:
            self._register(module, f"module {module.__name__}")


def _all_entries(registry: Registry) -> list[Entry]:
    return [e for stage in registry.entries.values() for e in stage.values()]


def _import_module(target: str):
    """The module ``target``, None if no such module exists, PluginError if it fails to import."""
    try:
        return importlib.import_module(target)
    except ModuleNotFoundError as exc:
        if exc.name is not None and (target == exc.name or target.startswith(exc.name + ".")):
            return None
        raise PluginError(f"module {target} failed to import: ModuleNotFoundError: {exc}",
                          plugin=target) from None
    except Exception as exc:  # noqa: BLE001 - any import failure is the plugin's
        tb = traceback.extract_tb(exc.__traceback__)
        where = f" ({tb[-1].filename}, line {tb[-1].lineno})" if tb else ""
        raise PluginError(f"module {target} failed to import{where}: {type(exc).__name__}: {exc}",
                          plugin=target) from None


def module_entries(module, *, entry_points: bool = True) -> tuple[Registry, list[Entry]]:
    """The registry with ``module`` registered, and the entries of the components its hooks provide.

    Raises
    ------
    PluginError
        If the module provides no component (or its components do not register).
    """
    registry = _ModuleRegistry([module], entry_points=entry_points)
    entries = []
    for stage, hook in HOOKS.items():
        for impl in getattr(registry.pm.hook, hook).get_hookimpls():
            if impl.plugin is module:
                comps = hook_components(impl.function() or [], hook, f"module {module.__name__}")
                entries += [registry.entries[stage][c.name] for c in comps]
    if not entries:
        raise PluginError(f"module {module.__name__} provides no components: none of its @hookimpl radwalk_* "
                          f"hooks returned any", plugin=module.__name__)
    return registry, entries


def resolve_target(target: str, *, entry_points: bool = True) -> tuple[Registry, list[Entry]]:
    """The registry holding ``target`` and the entries of the components it names.

    Parameters
    ----------
    target : str
        A plugin file (``*.py`` or any existing file), an importable module
        name, or the name of a registered component (every stage that has
        one of that name).
    entry_points : bool
        Whether installed entry-point plugins are loaded too.

    Returns
    -------
    registry : Registry
    entries : list of Entry

    Raises
    ------
    PluginError
        If the plugin does not load (naming the file and line where the
        registry can) or provides no component.
    ConfigError
        If ``target`` is neither a file, nor a module, nor a component name.
    """
    path = Path(target).expanduser()
    if target.endswith(".py") or path.is_file():
        registry = Registry(plugin_files=[path], entry_points=entry_points)
        source = f"file {path.resolve()}"
        entries = [e for e in _all_entries(registry) if e.source == source]
        if not entries:
            raise PluginError(f"plugin file {path.resolve()} provides no components: none of its "
                              f"@hookimpl radwalk_* hooks returned any", plugin=str(path))
        return registry, entries
    registry = Registry(entry_points=entry_points)
    named = [e for e in _all_entries(registry) if e.name == target]
    if named:
        return registry, named
    module = _import_module(target)
    if module is None:
        names = [e.name for e in _all_entries(registry)]
        raise ConfigError(f"{target!r} is not a plugin file, an importable module or a registered "
                          f"component{suggest(target, names)}; components: {', '.join(names)}")
    return module_entries(module, entry_points=entry_points)


def check_component(entry, grid_points: int | None = None, *, options: dict | None = None,
                    registry: Registry | None = None, checks=None) -> CheckReport:
    """Checks one component against its stage's contract.

    Parameters
    ----------
    entry : Entry, Subject or component
        From :func:`resolve_target` or ``Registry.entries``; a bare
        component's stage is the one whose method it has.
    grid_points : int, optional
        Points per axis of the opacity grid; by default enough for steps of
        at most 0.05 dex in T and 0.1 dex in rho (at most 400 per axis).  The
        smoothness limit refers to the steps of this grid.
    options : dict, optional
        Text options (e.g. ``{"table": "my.ecsv"}``) passed to the component's
        ``configure`` first.
    registry : Registry, optional
        Where a relation's check finds its opacity law (the opacity stage's
        default); a fresh one is built if needed.
    checks : iterable of str, optional
        Run only these checks (names as in the report), e.g.
        ``("configure", "call", "shape", "finite", "positive")``.

    Returns
    -------
    CheckReport
        One row per check reached, in report order: a check whose
        evaluation failed earlier (no shape to check after a call that
        raised) is left out.
    """
    subject = Subject.of(entry, options=options, grid_points=grid_points, registry=registry)
    report = CheckReport(subject.name, subject.stage, subject.source)
    for check in checks_for(subject.stage, checks):
        if check.applies_to(subject):
            row = subject.run(check)
            if row is not None:
                report.rows.append(row)
    report.seconds_per_million = subject.seconds_per_million
    return report


def check_target(target: str, *, grid_points: int | None = None, options: dict | None = None,
                 entry_points: bool = True) -> list[CheckReport]:
    """Checks every component of ``target``; a target that does not load gives one failed ``load`` row.

    Parameters
    ----------
    target : str
        As in :func:`resolve_target`.
    grid_points, options
        As in :func:`check_component`.
    entry_points : bool
        Whether installed entry-point plugins are loaded too.

    Returns
    -------
    list of CheckReport
    """
    try:
        registry, entries = resolve_target(target, entry_points=entry_points)
    except RadwalkError as exc:
        report = CheckReport(target, "", "not loaded")
        report.add("load", False, str(exc))
        return [report]
    return [check_component(e, grid_points=grid_points, options=options, registry=registry)
            for e in entries]
