"""One exception hierarchy for everything radwalk raises on purpose.

The CLI turns any :class:`RadwalkError` into a single line and exit status 2.
"""


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


class ConvergenceWarning(UserWarning):
    """The sampler stopped before its convergence criterion was met."""


class ValidityWarning(UserWarning):
    """A law or relation was used outside the range it is valid for."""
