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


#: the options of station gains solved inside a fit (uvfit.stats.gains)
GAIN_OPTIONS = ("gains", "gain_interval", "gain_prior")


def make_statistic(mode, vset, model, systematic=0.0, **options):
    """Build the statistic for ``mode`` on the unflagged rows of ``vset``.

    With ``gains`` (amplitude, phase or complex; and ``gain_interval``, ``gain_prior``) the
    complex mode solves station gains with the structure (:class:`uvfit.stats.gains.GainStatistic`).
    """
    if mode not in MODES:
        raise UvfitError(f"unknown mode '{mode}'", "use one of: " + ", ".join(MODES))
    gains = options.get("gains")
    if gains is None:
        for key in GAIN_OPTIONS:
            options.pop(key, None)
    else:
        from .gains import GainStatistic, check_gain_kind

        check_gain_kind(gains)
        if mode != "complex":
            raise UvfitError(
                f"gains={gains} needs mode complex (got mode {mode})",
                "use mode complex, or leave gains out (closure modes need no gain solution)",
            )
        return GainStatistic(vset, model, systematic=systematic, **options)
    module, name, _ = MODES[mode]
    cls = getattr(importlib.import_module(module), name)
    return cls(vset, model, systematic=systematic, **options)
