"""The contract as test cases, one per check and component, for a plugin author's own test suite.

In the author's test file::

    import pytest
    from radwalk.host.contracts import contract_cases

    @pytest.mark.parametrize("case", contract_cases("my_plugin.py"), ids=str)
    def test_contract(case):
        case.run()

Each case is named ``<stage>:<component>:<check>`` (``opacity:my-law:finite``),
so a failure names the check and ``pytest -k finite`` picks it.  A case whose
check cannot be reached because an earlier one of the same component failed
(no shape to check after a call that raised) is skipped, naming that check.
The cases of one component share its evaluations: the grid call of an
opacity law runs once however many cases judge it.
"""

from __future__ import annotations

import types
import unittest
from dataclasses import dataclass

from radwalk.errors import RadwalkError
from radwalk.host.contracts.checks import checks_for
from radwalk.host.contracts.outcome import CheckRow
from radwalk.host.contracts.subject import Check, Subject
from radwalk.host.contracts.targets import module_entries, resolve_target
from radwalk.host.registry import Entry


class ContractFailure(AssertionError):
    """A component fails a check of its contract (an AssertionError, so test runners report a failure)."""

    __module__ = "radwalk.host.contracts"  # where it is imported from; shown in test reports


@dataclass(frozen=True, eq=False)
class ContractCase:
    """One check of one component, runnable as a test: :meth:`run` passes, fails or skips.

    Attributes
    ----------
    subject : Subject or None
        The component and its shared evaluations; None for a target that did not load.
    check : Check or None
        The check; None for a target that did not load.
    target : str
        What was asked for, as given.
    error : str
        Why the target did not load ("" if it did).
    """

    subject: Subject | None
    check: Check | None
    target: str = ""
    error: str = ""

    @property
    def id(self) -> str:
        if self.subject is None:
            return f"{self.target}:load"
        return f"{self.subject.stage}:{self.subject.name}:{self.check.name}"

    def __str__(self) -> str:
        return self.id

    def __repr__(self) -> str:
        return f"ContractCase({self.id!r})"

    def run(self) -> CheckRow:
        """Runs the check; returns its passing row.

        Raises
        ------
        ContractFailure
            If the check fails, or the target did not load.
        unittest.SkipTest
            If an earlier check of the component failed, so this one was
            not reached (pytest reports it as skipped).
        """
        __tracebackhide__ = True  # pytest shows the author's test line, not this one
        if self.subject is None:
            raise ContractFailure(f"{self.target} did not load: {self.error}")
        row = self.subject.run(self.check)
        s = self.subject
        if row is None:
            raise unittest.SkipTest(f"{self.check.name!r} not reached: {self._why_not_reached()}")
        if not row.passed:
            raise ContractFailure(f"{s.stage} component {s.name!r} ({s.source}) fails the {row.check!r} check: "
                                  f"{row.detail}")
        return row

    def _why_not_reached(self) -> str:
        failed = []
        for check in checks_for(self.subject.stage):
            if check.name == self.check.name:
                break
            if check.applies_to(self.subject):
                row = self.subject.run(check)
                if row is not None and not row.passed:
                    failed.append(repr(check.name))
        return f"{', '.join(failed)} failed" if failed else "an earlier evaluation failed"


def _subjects(target, *, options, grid_points, entry_points) -> list:
    """Subjects for ``target``; a (target, error) pair in place of those of a target that does not load."""
    if isinstance(target, (list, tuple)):
        return [s for t in target for s in _subjects(t, options=options, grid_points=grid_points,
                                                     entry_points=entry_points)]
    kwargs = {"options": options, "grid_points": grid_points}
    label = getattr(target, "__name__", None) or getattr(target, "name", None) or str(target)
    try:
        if isinstance(target, Subject):
            return [target]
        if isinstance(target, Entry):
            return [Subject.of(target, **kwargs)]
        if isinstance(target, (str, types.ModuleType)):
            if isinstance(target, str):
                registry, entries = resolve_target(target, entry_points=entry_points)
            else:
                registry, entries = module_entries(target, entry_points=entry_points)
            return [Subject.of(e, registry=registry, **kwargs) for e in entries]
        return [Subject(target, **kwargs)]
    except RadwalkError as exc:
        return [(label, str(exc))]


def contract_cases(target, *, options: dict | None = None, grid_points: int | None = None,
                   entry_points: bool = False, checks=None) -> list[ContractCase]:
    """Every check of every component of ``target``, as test cases (see the module docstring).

    Parameters
    ----------
    target : str, module, component, Entry or Subject, or a list of them
        A plugin file, an importable module name or a registered component
        name (as for ``radwalk check-plugin``); a module object; or a
        component object itself (its stage is the one whose method it has).
    options : dict, optional
        Text options passed to each component's ``configure`` first.
    grid_points : int, optional
        Points per axis of the opacity grid (see :func:`check_component`).
    entry_points : bool
        Whether installed entry-point plugins are loaded too.  Off by
        default, so that an installed copy of the plugin under test does not
        clash with the file or module being tested.
    checks : iterable of str, optional
        Only these checks (names as in the report).

    Returns
    -------
    list of ContractCase
        One per check that applies to the component, named
        ``<stage>:<component>:<check>``; a target that does not load gives
        one case ``<target>:load`` that fails with the reason.
    """
    cases = []
    for subject in _subjects(target, options=options, grid_points=grid_points, entry_points=entry_points):
        if isinstance(subject, tuple):
            cases.append(ContractCase(None, None, target=subject[0], error=subject[1]))
            continue
        cases += [ContractCase(subject, check, target=subject.name)
                  for check in checks_for(subject.stage, checks) if check.applies_to(subject)]
    return cases
