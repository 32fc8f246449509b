"""radwalk: stellar interiors and photon transport timescales from observed R, L and T_eff.

The package is layered; lower layers never import higher ones (a test reads
the import graph):

``radwalk.host``       hook specs, plugin manager, component protocols, parameters, the stage table
``radwalk.physics``    pure numerics in cgs (composition, Lane-Emden, energy generation, transport, ...)
``radwalk.forward``    the forward model: stage set, relation grid cache, quantity catalogue
``radwalk.results``    the on-disk contract: files, summary documents, tables
``radwalk.inference``  star records, posterior, sampler, fits
``radwalk.run``        catalog runs: reader, state, executors, orchestration
``radwalk.report``     figures and HTML pages read from stored results
``radwalk.cli``        the ``radwalk`` command
``radwalk.plugins``    the built-in components

For notebooks, :func:`radwalk.fit` and :func:`radwalk.model` are the public
entry points; they are imported on first use so ``import radwalk`` stays light.
"""

from importlib import metadata as _metadata

try:
    __version__ = _metadata.version("radwalk")
except _metadata.PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0+unknown"

__all__ = ["__version__", "fit", "model"]


def __getattr__(name):
    # The API pulls in the sampler and the forward model; load it only when asked.
    if name in ("fit", "model"):
        from radwalk import api

        return getattr(api, name)
    raise AttributeError(f"module 'radwalk' has no attribute {name!r}")
