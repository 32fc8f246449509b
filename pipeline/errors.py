"""One exception hierarchy for everything radwalk raises on purpose.

The CLI turns any :class:`RadwalkError` into a single line and exit status 2.
"""

import errno
import os


class RadwalkError(Exception):
    """Base of every error radwalk raises deliberately."""


class ConfigError(RadwalkError):
    """A run configuration, option or parameter value is not allowed."""


class CatalogError(RadwalkError):
    """A catalog file or one of its rows cannot be used."""


class PluginError(RadwalkError):
    """A plugin failed to load or its component broke its contract.

    Parameters
    ----------
    message : str
        What went wrong.
    plugin : str, optional
        Name or path of the plugin (or component) at fault.
    """

    def __init__(self, message: str, plugin: str | None = None):
        super().__init__(message)
        self.plugin = plugin


class ModelError(RadwalkError):
    """A physical model cannot be evaluated for the given inputs."""


class EnvironmentProblem(RadwalkError):
    """The machine failed a star, not the star itself: no space left, an I/O error, out of memory.

    A star stopped by one is never marked done (no summary.json), so running
    the same command again after the cause is fixed computes it.
    """


# errno values that say the machine (disk, memory, file table) failed, never the star's own data
ENVIRONMENT_ERRNOS = frozenset(getattr(errno, n) for n in ("ENOSPC", "EDQUOT", "EIO", "EROFS", "ENOMEM", "EMFILE",
                                                           "ENFILE", "EFBIG") if hasattr(errno, n))


def environment_cause(exc: BaseException) -> str | None:
    """One line naming an environmental cause of ``exc`` (see :class:`EnvironmentProblem`), else None."""
    if isinstance(exc, EnvironmentProblem):
        return str(exc)
    if isinstance(exc, MemoryError):
        return "out of memory"
    if isinstance(exc, OSError) and exc.errno in ENVIRONMENT_ERRNOS:
        where = f" writing {exc.filename}" if getattr(exc, "filename", None) else ""
        return f"{os.strerror(exc.errno)}{where}"
    return None


class ConvergenceWarning(UserWarning):
    """The sampler stopped before its convergence criterion was met."""


class ValidityWarning(UserWarning):
    """A law or relation was used outside the range it is valid for."""
