"""Progress on stderr: a redrawn line on a terminal, plain lines (no carriage returns) in a log file or pipe.

A progress bar redraws itself with carriage returns; written into a log file
those frames pile up as one unreadable line.  So the commands draw bars only
when stderr is a terminal, and otherwise write a whole line now and then.
"""

from __future__ import annotations

import sys
import time

from radwalk.run.log_lines import plain_lines, stderr_is_terminal

__all__ = ["ChainProgress", "plain_lines", "stderr_is_terminal"]


class ChainProgress:
    """The sampler's progress callback for one star's fit: steps done and the autocorrelation time.

    On a terminal one line is redrawn after every chunk of steps; elsewhere a
    whole line is written at most every ``every`` seconds (and for the first
    chunk), so a log shows the fit moving without carriage-return frames.

    Parameters
    ----------
    max_steps : int
        The sampler's step limit (shown as the total).
    laws : sequence of str
        The opacity laws fitted one after the other (named in the line when several).
    tau_multiple : float
        Steps needed per autocorrelation time before the chain may stop.
    terminal : bool or None
        Redraw one line (True) or write plain lines (False); None asks stderr.
    every : float, s
        Least time between plain lines.
    """

    def __init__(self, max_steps: int, tau_multiple: float, laws=(), terminal: bool | None = None,
                 every: float = 30.0):
        self.max_steps = int(max_steps)
        self.several = len(tuple(laws)) > 1
        self.tau_multiple = float(tau_multiple)
        self.terminal = stderr_is_terminal() if terminal is None else bool(terminal)
        self.every = float(every)
        self._law = None
        self._last = None
        self._drawn = False

    def begin(self, star_id: str, walkers: int):
        """One line before the optimiser starts (it runs before the first chunk of steps)."""
        sys.stderr.write(f"radwalk: sampling star {star_id}: {walkers} walkers, up to {self.max_steps} steps, "
                         "after the search for the best fit\n")
        sys.stderr.flush()

    def text(self, law: str | None, steps: int, tau) -> str:
        tau_max = float(max(tau)) if len(tau) else float("nan")
        need = self.tau_multiple * tau_max
        label = f"[{law}] " if self.several and law else ""
        return (f"{label}sampling: {steps}/{self.max_steps} steps, tau_max {tau_max:.1f} "
                f"(stops once steps > {need:.0f} and tau is steady)")

    def __call__(self, law: str | None, steps: int, tau):
        line = self.text(law, steps, tau)
        now = time.monotonic()
        if law != self._law:  # a new law's chain: its first chunk is always shown
            self._law, self._last = law, None
        if self.terminal:
            sys.stderr.write("\r\033[K" + line)
            self._drawn = True
        elif self._last is None or now - self._last >= self.every or steps >= self.max_steps:
            sys.stderr.write(f"radwalk: {line}\n")
            self._last = now
        else:
            return
        sys.stderr.flush()

    def close(self):
        """Ends the redrawn line so later output starts on its own line."""
        if self._drawn:
            sys.stderr.write("\n")
            sys.stderr.flush()
            self._drawn = False
