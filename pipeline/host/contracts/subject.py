"""The component under check, and the evaluations its checks share.

Every check is a small function ``check(subject) -> CheckRow | None``.  The
checks of one component look at the same evaluations (the opacity checks all
judge one call on a grid of rho x T), so a :class:`Subject` computes each
evaluation once, when the first check needs it, and keeps it with the
warnings it emitted.  A check returns None when it cannot be reached: an
earlier evaluation failed (a call that raised has no shape to check), or it
does not apply (no options to configure).
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.registry import Entry, Registry
from radwalk.host.stages import stage_of

_TIMING_SECONDS = 0.1  # spend about this long timing


class Subject:
    """A component under check: its stage, where it came from, and the evaluations its checks share.

    Parameters
    ----------
    component : object
        The component as registered (before ``configure``).
    stage : str, optional
        Its stage; by default the stage whose method it has (see
        :func:`radwalk.host.stages.stage_of`).
    source : str, optional
        Where it came from, for the report.
    options : dict, optional
        Text options passed to the component's ``configure`` before any check.
    grid_points : int, optional
        Points per axis of the opacity grid (see :func:`radwalk.host.contracts.check_component`).
    registry : Registry, optional
        Where a relation's check finds its opacity law; a fresh one is built if needed.
    """

    def __init__(self, component, stage: str | None = None, *, source: str | None = None,
                 options: dict | None = None, grid_points: int | None = None, registry: Registry | None = None):
        self.original = component
        self.stage = stage or stage_of(component)
        kind = type(component)
        self.source = source if source is not None else f"object {kind.__module__}.{kind.__qualname__}"
        self.options = dict(options or {})
        self.grid_points = grid_points
        self._registry = registry
        self.caught: list = []  # warnings emitted by the evaluations
        self.seconds_per_million: float | None = None
        self._memo: dict = {}
        self._rows: dict = {}

    @classmethod
    def of(cls, thing, **kwargs) -> Subject:
        """``thing`` as a Subject: a Subject as it is, an Entry with its stage and source, or a component."""
        if isinstance(thing, Subject):
            given = {key: v for key, v in kwargs.items() if v is not None}
            if given:
                raise TypeError(f"{', '.join(given)} cannot be given with a Subject; give them to Subject()")
            return thing
        if isinstance(thing, Entry):
            return cls(thing.component, thing.stage, source=thing.source, **kwargs)
        return cls(thing, **kwargs)

    @property
    def name(self) -> str:
        return str(getattr(self.original, "name", type(self.original).__name__))

    @property
    def registry(self) -> Registry:
        if self._registry is None:
            self._registry = Registry()
        return self._registry

    def configured(self) -> tuple[bool, object]:
        """(True, the component configured with the options) or (False, why it could not be)."""
        def configure():
            if not self.options:
                return True, self.original
            if not callable(getattr(self.original, "configure", None)):
                return False, (f"options {', '.join(self.options)} given, but the component has no "
                               f"configure(**options)")
            ok, res = record([], self.original.configure, **self.options)
            return (True, res) if ok else (False, f"configure raised {res}")

        return self.memo("configured", configure)

    @property
    def component(self):
        """The configured component, None if configuring it failed."""
        ok, comp = self.configured()
        return comp if ok else None

    def memo(self, key: str, compute: Callable):
        """``compute()``, once per Subject and key."""
        if key not in self._memo:
            self._memo[key] = compute()
        return self._memo[key]

    def call(self, fn, *args, **kwargs):
        """Calls ``fn`` recording its warnings; (True, result) or (False, the exception as text)."""
        return record(self.caught, fn, *args, **kwargs)

    def run(self, check: Check) -> CheckRow | None:
        """The row of ``check`` on this component (run once, then kept)."""
        if check.name not in self._rows:
            self._rows[check.name] = check.function(self)
        return self._rows[check.name]


@dataclass(frozen=True)
class Check:
    """A named check of a stage's contract.

    Attributes
    ----------
    name : str
        The name of its row in the report (and of its test case).
    function : callable
        ``function(subject) -> CheckRow | None``; None when the check is not
        reached (an evaluation it judges failed earlier).
    applies : callable, optional
        ``applies(subject) -> bool`` from the declarations alone; a check
        that does not apply is left out of the report and gets no test case.
    """

    name: str
    function: Callable
    applies: Callable | None = None

    def applies_to(self, subject: Subject) -> bool:
        return self.applies is None or bool(self.applies(subject))

    @property
    def summary(self) -> str:
        """The first line of the check function's docstring."""
        return (self.function.__doc__ or "").strip().splitlines()[0]


# -- shared by the checks of several stages -----------------------------------------------
def record(caught: list, fn, *args, **kwargs):
    """Calls ``fn`` recording warnings into ``caught``; returns (ok, result or exception text)."""
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        try:
            result = fn(*args, **kwargs)
        except Exception as exc:  # noqa: BLE001 - the component's failure is what we report
            caught.extend(rec)
            return False, f"{type(exc).__name__}: {exc}"
    caught.extend(rec)
    return True, result


def time_per_million(fn, npoints: int) -> float:
    """Seconds per million points of ``fn()`` (warnings silenced: they are another check's)."""
    calls, spent = 0, 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        while calls < 3 or spent < _TIMING_SECONDS:
            t0 = time.perf_counter()
            fn()
            spent += time.perf_counter() - t0
            calls += 1
    return spent / calls / npoints * 1e6


def warnings_row(subject: Subject, where: str) -> CheckRow:
    """The ``warnings`` row: none of the subject's evaluations so far warned."""
    caught = subject.caught
    if caught:
        w = caught[0]
        return CheckRow("warnings", False, f"{len(caught)} warning(s) {where}; first: "
                                           f"{w.category.__name__}: {w.message}")
    return CheckRow("warnings", True, f"none {where}".rstrip())


def loop_mismatch(subject: Subject, fn, n: int, args_of, outputs_of, label, full) -> str | None:
    """Calls ``fn`` on each sample alone; the first difference from ``full``, the n-sample outputs, or None."""
    full = outputs_of(full)
    for i in range(n):
        ok, res = subject.call(fn, *args_of(slice(i, i + 1)))
        if not ok:
            return f"a call for {label(i)} alone raised {res}"
        for name, one in outputs_of(res).items():
            whole = full[name][i:i + 1]
            if one.size != whole.size or not np.allclose(one.reshape(whole.shape), whole, rtol=1e-9,
                                                         atol=0.0, equal_nan=True):
                return f"{name} of {label(i)} differs when called alone"
    return None


def broadcasting_row(mismatch: str | None, n: int) -> CheckRow:
    """The ``broadcasting`` row of a stage whose n-sample call is compared with n one-sample calls."""
    return CheckRow("broadcasting", mismatch is None, mismatch or f"{n} one-sample calls equal the {n}-sample call")


def inputs_row(s: Subject, call, used, fresh, names: dict) -> CheckRow | None:
    """The ``inputs`` row: the component's calls left their input arrays as they were given.

    ``used`` is the inputs object the stage's calls received, ``fresh`` the same
    inputs built anew; ``names`` maps each input's name in the report to its
    attribute (a dict attribute is compared key by key, named ``attr[key]``).
    A fit passes components read-only arrays, so a law that writes into its
    inputs fails there; this names the input it wrote into.
    """
    if s.component is None or not call(s)[0]:
        return None
    for label, attr in names.items():
        a, b = getattr(used, attr), getattr(fresh, attr)
        pairs = [(f"{label}[{key!r}]", a[key], b[key]) for key in a] if isinstance(a, dict) else [(label, a, b)]
        for name, x, y in pairs:
            x, y = np.asarray(x), np.asarray(y)
            if x.shape != y.shape or not np.array_equal(x, y, equal_nan=True):
                return CheckRow("inputs", False, f"the component changed its input {name} in place; inputs are "
                                                 "read-only in a fit: copy an array before changing it")
    return CheckRow("inputs", True, f"{', '.join(names)} left as given")
