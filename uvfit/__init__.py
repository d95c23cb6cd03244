"""uvfit: parametric sky models fitted directly to interferometric visibilities.

The public face: data (:func:`read`, :func:`write`, :class:`VisibilitySet`), models
(:func:`load_model`, :class:`SkyModel`), the tasks (:func:`fit`, :func:`sample`, :func:`compare`,
:func:`closures`, :func:`simulate`, :func:`forecast`; also ``uvfit.tasks.info``), their result
records and :class:`UvfitError`. Each task returns a record whose ``to_dict()`` is the JSON the
command of the same name writes, and whose ``text()`` is the table it prints.
"""

__version__ = "0.1.0"

import os as _os
from typing import Any as _Any

from .data.visset import StationTable, VisibilitySet  # noqa: E402
from .errors import UvfitError  # noqa: E402
from .sky.model import SkyModel  # noqa: E402
from .tasks import (  # noqa: E402
    ClosureReport,
    CompareReport,
    FitReport,
    ForecastReport,
    InfoReport,
    SampleReport,
    SimulationReport,
    closures,
    compare,
    fit,
    forecast,
    sample,
    simulate,
)


def read(path: "str | _os.PathLike[str]", **options: _Any) -> VisibilitySet:
    """Read a visibility file into a VisibilitySet (every row; flagged rows have ``flag`` set).

    Parameters
    ----------
    path : str or path-like
        A UVFITS file (.uvfits, .uvf, .fits) or the project's ECSV table (.ecsv).
    **options
        Passed to the reader: ``format`` ('uvfits' or 'ecsv') overrides the suffix; UVFITS
        ``source=NAME`` picks a source of a multi-source file.

    Returns
    -------
    VisibilitySet

    Raises
    ------
    UvfitError
        The file is missing, unreadable, or not what its name says.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> vset = uvfit.read(demo_file("uvd0917.uvfits"))
    >>> vset.source
    'UVD 0917+224'
    """
    from .data.io import read as _read

    return _read(path, **options)


def write(vset: VisibilitySet, path: "str | _os.PathLike[str]", force: bool = False, **options: _Any) -> _Any:
    """Write a VisibilitySet atomically; the format follows the suffix (.uvfits or .ecsv).

    Parameters
    ----------
    vset : VisibilitySet
        The visibilities.
    path : str or path-like
        The file to write.
    force : bool
        Overwrite an existing file (refused otherwise).
    **options
        Passed to the writer (``format`` overrides the suffix).

    Returns
    -------
    The writer's return value (the path written).

    Raises
    ------
    UvfitError
        Unknown suffix, or the file exists and ``force`` is not given.

    Examples
    --------
    >>> import os, tempfile, uvfit
    >>> from uvfit.demo import demo_file
    >>> vset = uvfit.read(demo_file("uvd0917.uvfits"))
    >>> out = os.path.join(tempfile.mkdtemp(), "copy.ecsv")
    >>> _ = uvfit.write(vset, out)
    >>> uvfit.read(out).n == vset.n
    True
    """
    from .data.io import write as _write

    return _write(vset, path, force=force, **options)


def load_model(path: "str | _os.PathLike[str]") -> SkyModel:
    """Load a sky model from a TOML model file (see README, "Model files").

    Parameters
    ----------
    path : str or path-like
        The model file.

    Returns
    -------
    SkyModel

    Raises
    ------
    UvfitError
        The file is missing or invalid (the message names the line and key).

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> model = uvfit.load_model(demo_file("two.toml"))
    >>> model.free_names[:2]
    ['pair.flux', 'pair.east']
    """
    from .sky.modelfile import load_model as _load

    return _load(path)


__all__ = [
    "read",
    "write",
    "load_model",
    "fit",
    "sample",
    "compare",
    "closures",
    "simulate",
    "forecast",
    "VisibilitySet",
    "StationTable",
    "SkyModel",
    "UvfitError",
    "FitReport",
    "SampleReport",
    "CompareReport",
    "ClosureReport",
    "InfoReport",
    "SimulationReport",
    "ForecastReport",
    "__version__",
]
