"""The package version, read once from the installed package's metadata."""

from __future__ import annotations

from importlib import metadata

__all__ = ["VERSION"]

try:
    #: the version of the installed distribution ``fxnet-widgets`` (pyproject.toml)
    VERSION = metadata.version("fxnet-widgets")
except metadata.PackageNotFoundError:  # running from a source tree that was never installed
    VERSION = "0+unknown"
