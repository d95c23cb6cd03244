"""uvfit: parametric sky models fitted directly to interferometric visibilities.

The public face: ``read``, ``write``, ``load_model``, ``VisibilitySet``, ``UvfitError``.
"""
__version__ = "0.1.0"

from .errors import UvfitError  # noqa: E402
from .data.visset import VisibilitySet, StationTable  # noqa: E402


def read(path, **options):
    """Read a visibility file (.uvfits / .uvf / .fits, or .ecsv) into a VisibilitySet."""
    from .data.io import read as _read
    return _read(path, **options)


def write(vset, path, force=False, **options):
    """Write a VisibilitySet; the format follows the suffix (.uvfits or .ecsv)."""
    from .data.io import write as _write
    return _write(vset, path, force=force, **options)


def load_model(path):
    """Load a sky model from a TOML model file (see README, "Model files")."""
    from .sky.modelfile import load_model as _load
    return _load(path)


__all__ = ["read", "write", "load_model", "VisibilitySet", "StationTable", "UvfitError", "__version__"]
