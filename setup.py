"""Package layout: the folder pipeline/ installs as the import package ``radwalk`` and plugins/ as
``radwalk.plugins``.  Subpackages are discovered, so a new one can never be left out of a wheel.
The top-level demo_catalog/ folder installs as ``radwalk.data.demo_catalog`` (its tables, config and
README as package data), so ``radwalk demo`` finds it in a wheel as in a clone.
Everything else is in pyproject.toml."""

from setuptools import find_packages, setup


def _under(prefix: str, folder: str) -> list[str]:
    return [prefix] + [f"{prefix}.{name}" for name in find_packages(folder)]


setup(
    packages=_under("radwalk", "pipeline") + _under("radwalk.plugins", "plugins") + ["radwalk.data.demo_catalog"],
    package_dir={"radwalk": "pipeline", "radwalk.plugins": "plugins", "radwalk.data.demo_catalog": "demo_catalog"},
)
