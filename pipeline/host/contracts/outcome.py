"""The outcome of contract checks: one row per check, and the report of one component."""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class CheckRow:
    """One check: its name, whether it passed, and what was found."""

    check: str
    passed: bool
    detail: str


@dataclass
class CheckReport:
    """The checks of one component (or of a target that failed to load).

    Attributes
    ----------
    component : str
        Component name (the target itself if it did not load).
    stage : str
        Stage of the component ("" if it did not load).
    source : str
        Where it came from, as the registry says.
    rows : list of CheckRow
    seconds_per_million : float or None, s
        Evaluation time per million points, where measured.
    """

    component: str
    stage: str
    source: str
    rows: list[CheckRow] = field(default_factory=list)
    seconds_per_million: float | None = None

    @property
    def passed(self) -> bool:
        return bool(self.rows) and all(r.passed for r in self.rows)

    def add(self, check: str, passed: bool, detail: str) -> bool:
        self.rows.append(CheckRow(check, bool(passed), detail))
        return bool(passed)

    def row(self, check: str) -> CheckRow:
        """The row of the named check (KeyError if it was not run)."""
        for r in self.rows:
            if r.check == check:
                return r
        raise KeyError(f"no check {check!r} in the report of {self.component!r}")

    def failed(self) -> list[CheckRow]:
        return [r for r in self.rows if not r.passed]

    def format_table(self) -> str:
        """An aligned plain-text table of the checks with a closing verdict line."""
        title = f"{self.stage} component {self.component!r} ({self.source})" if self.stage \
            else f"{self.component} ({self.source})"
        width = max([len("check")] + [len(r.check) for r in self.rows])
        lines = [title, f"  {'check':<{width}}  result  detail", f"  {'-' * width}  ------  ------"]
        for r in self.rows:
            lines.append(f"  {r.check:<{width}}  {'pass' if r.passed else 'FAIL':<6}  {r.detail}")
        bad = len(self.failed())
        lines.append(f"  all {len(self.rows)} checks passed" if self.passed
                     else f"  {bad} of {len(self.rows)} checks failed")
        return "\n".join(lines)
