"""The package version, in one place: ``pyproject.toml`` reads it from here at build time
(``[tool.setuptools.dynamic]``), ``tiltwell.__version__`` and ``tiltwell --version`` show it."""

__all__ = ["VERSION"]

VERSION = "0.1.0"
