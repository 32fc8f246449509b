"""Package layout: the folder pipeline/ installs as the import package ``radwalk`` and plugins/ as
``radwalk.plugins``.  Subpackages are discovered, so a new one can never be left out of a wheel.
Everything else is in pyproject.toml."""

from setuptools import find_packages, setup


def _under(prefix: str, folder: str) -> list[str]:
    return [prefix] + [f"{prefix}.{name}" for name in find_packages(folder)]


setup(
    packages=_under("radwalk", "pipeline") + _under("radwalk.plugins", "plugins"),
    package_dir={"radwalk": "pipeline", "radwalk.plugins": "plugins"},
)
