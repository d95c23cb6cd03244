"""The fitting modes by name, and where each statistic lives.

One table, so that the command line, the fitter and the sampler agree on the names.
"""

import importlib

from ..errors import UvfitError

MODES = {
    "complex": (
        "uvfit.stats.visibility",
        "ComplexStatistic",
        "real and imaginary parts of the calibrated visibilities",
    ),
    "amplitude": (
        "uvfit.stats.visibility",
        "AmplitudeStatistic",
        "visibility amplitudes only (absolute position unconstrained)",
    ),
    "closure_phase": (
        "uvfit.stats.closures.statistics",
        "ClosurePhaseStatistic",
        "closure phases only (absolute position and flux unconstrained)",
    ),
    "closure_amplitude": (
        "uvfit.stats.closures.statistics",
        "LogClosureAmplitudeStatistic",
        "log closure amplitudes only (total flux and position unconstrained)",
    ),
    "closure": (
        "uvfit.stats.closures.statistics",
        "ClosureStatistic",
        "closure phases and log closure amplitudes (immune to station gains)",
    ),
    "hybrid": (
        "uvfit.stats.closures.statistics",
        "HybridStatistic",
        "visibility amplitudes and closure phases (immune to station phase errors)",
    ),
}


def make_statistic(mode, vset, model, systematic=0.0, **options):
    """Build the statistic for ``mode`` on the unflagged rows of ``vset``."""
    if mode not in MODES:
        raise UvfitError(f"unknown mode '{mode}'", "use one of: " + ", ".join(MODES))
    module, name, _ = MODES[mode]
    cls = getattr(importlib.import_module(module), name)
    return cls(vset, model, systematic=systematic, **options)
