"""What an output file records of the software that wrote it: radwalk's and its libraries' versions."""

from __future__ import annotations

import sys

# Packages whose versions the output files record (besides radwalk and Python).
VERSION_PACKAGES = ("numpy", "scipy", "emcee", "astropy", "h5py")


def package_versions(packages=VERSION_PACKAGES) -> dict:
    """radwalk's, Python's and ``packages``' versions ("not installed" where absent)."""
    from importlib import metadata

    from radwalk import __version__

    out = {"radwalk": __version__, "python": sys.version.split()[0]}
    for name in packages:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out
