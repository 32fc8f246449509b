"""radwalk host package: hook specs, plugin manager, physics, inference and runs."""

__version__ = "0.1.0"
