"""tauproof: verification of hand-calculated step responses of linear lumped circuits.

The version has one source, ``[project] version`` in pyproject.toml; ``__version__`` reads it
from the installed package's metadata.
"""

from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("tauproof")
except PackageNotFoundError:  # pragma: no cover - running from a tree that was never installed
    __version__ = "0+unknown"
