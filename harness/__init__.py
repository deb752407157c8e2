"""tauproof: verification of hand-calculated step responses of linear lumped circuits.

The version has one source, ``[project] version`` in pyproject.toml; ``__version__`` reads it
from the installed package's metadata on first use (``importlib.metadata`` costs a noticeable
share of a small run's start-up, and only ``--version`` and the reports' provenance need it).
"""


def __getattr__(name: str):
    """``__version__``, read once from the package metadata (PEP 562 module attribute)."""
    if name != "__version__":
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    from importlib.metadata import PackageNotFoundError, version
    try:
        value = version("tauproof")
    except PackageNotFoundError:  # pragma: no cover - a tree that was never installed
        value = "0+unknown"
    globals()["__version__"] = value
    return value
