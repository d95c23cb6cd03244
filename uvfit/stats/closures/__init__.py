"""Closure phases and log closure amplitudes: construction, statistics, the check, the table.

Modules, one concept each:

- :mod:`~uvfit.stats.closures.build`: closure sets from a VisibilitySet (triangles, quadrangles,
  snapshots, reference amplitudes and errors, non-redundant or full sets);
- :mod:`~uvfit.stats.closures.covariance`: the choice of covariance and its whitening;
- :mod:`~uvfit.stats.closures.statistics`: the fitting modes closure_phase, closure_amplitude,
  closure and hybrid;
- :mod:`~uvfit.stats.closures.check`: how well any model reproduces the closures, and the verdict;
- :mod:`~uvfit.stats.closures.table`: the closures as an astropy Table.
"""

from .build import DEFAULT_SNR_CUT, ClosureSet, build_closures
from .check import CLOSURE_CAUTION, check_closures, json_summary
from .covariance import COVARIANCE_NOTE
from .statistics import (
    ClosurePhaseStatistic,
    ClosureStatistic,
    HybridStatistic,
    LogClosureAmplitudeStatistic,
)
from .table import closure_table

__all__ = [
    "CLOSURE_CAUTION",
    "COVARIANCE_NOTE",
    "DEFAULT_SNR_CUT",
    "ClosurePhaseStatistic",
    "ClosureSet",
    "ClosureStatistic",
    "HybridStatistic",
    "LogClosureAmplitudeStatistic",
    "build_closures",
    "check_closures",
    "closure_table",
    "json_summary",
]
