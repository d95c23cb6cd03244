"""Texts the library writes into its outputs, in one place: the cautions and the unit text.

The cautions are part of the JSON outputs (``cautions``, ``caution``) and of the printed tables;
changing a word here changes those outputs.
"""

#: cautions every fit result carries (``cautions`` of the fit JSON)
FIT_CAUTIONS = [
    "These results hold for the model family fitted; a different family could fit as well or better.",
    "A fit of a few components is no substitute for an image when the structure is complex.",
    "Calibration errors can mimic or hide structure: check the closure quantities with `uvfit closures`.",
]

#: cautions every model image carries (``cautions`` of the image JSON, HISTORY of the FITS file)
IMAGE_CAUTIONS = [
    "This image is the fitted model, not an image made from the data: structure the model lacks is absent.",
    "Restored with a beam, it shows the model at that resolution; it is not a deconvolved map.",
]

#: cautions every motion result carries (``cautions`` of the motion JSON)
MOTION_CAUTIONS = [
    "A linear motion is assumed: accelerating or curved paths bias the speed and the ejection epoch.",
    "The reference is assumed stationary: a core whose position shifts with time or frequency moves every "
    "component with it.",
]

#: the caution of a model comparison (``caution`` of the comparison JSON, and the verdict's end)
COMPARE_CAUTION = (
    "This holds for these model families only: a model outside them may describe the "
    "data better, and calibration errors can mimic structure (check `uvfit closures`)."
)


#: cautions every forecast carries (``cautions`` of the forecast JSON)
FORECAST_CAUTIONS = [
    "The forecast assumes the array file's SEFDs, the stated gain errors and nothing else: "
    "real calibration and weather are worse.",
    "Recovery is judged for the true model's family only; other structures could fit as well.",
    "The likelihood-ratio threshold is nominal: its chi-square reference fails when a component's "
    "flux can go to zero (a boundary case).",
]

#: the caution every closure result carries
CLOSURE_CAUTION = (
    "Closure quantities are immune to station-based gain errors but not to "
    "baseline-based errors (e.g. bandpass or polarisation leakage that differ per "
    "baseline), and they cannot fix the absolute position or the total flux of the "
    "model. A good closure fit supports the model family fitted; it does not exclude "
    "other structure the model cannot represent."
)

#: the line printed under the posterior table
SAMPLE_CAUTION = (
    "Credible intervals hold for this model family and these data weights; calibration "
    "errors outside the statistic are not in them."
)

#: the report's cautions: (title, text)
REPORT_CAUTIONS = [
    (
        "Model family",
        "Every number here holds for the model family that was fitted. A good chi-square says the "
        "data do not contradict this model; it does not say the source is made of these components. "
        "A fit of a few components is no substitute for an image where the structure is complex.",
    ),
    (
        "Calibration",
        "The complex mode trusts the phase calibration: station phase errors become structure. "
        "The amplitude modes trust the amplitude calibration and flux scale. Closure modes are immune "
        "to station-based gains but give up absolute position and (for closure amplitudes) total "
        "flux. A systematic error floor, where one was used, is an assumption, not a measurement.",
    ),
    (
        "What the closure check rules out",
        "Closure phases and closure amplitudes cannot be changed by any station-based gain error, so "
        "a model that matches the visibilities but not the closures is suspect. The check is blind to "
        "baseline-based errors (which do change closures, and could mimic or hide structure), and it "
        "says nothing about the absolute position or the flux scale.",
    ),
    (
        "Errors",
        "Least-squares errors come from the curvature of chi-square at the best fit and assume "
        "Gaussian noise with the stated sigmas; where the posterior is asymmetric or the sigmas are "
        "mis-scaled, prefer the sampler's intervals and look at the reduced chi-square.",
    ),
]

#: the demo's last caution, printed before its answer
DEMO_CAUTION = (
    "Caution: the answer holds for the two model families tried, and these invented data "
    "are perfectly calibrated; with real data check the closures and try other models."
)


def unit_text(param):
    """The unit of a parameter (anything with a ``unit``, or a unit itself) as written in the
    outputs: ``"Jy"``, ``"mas"``, ``"deg"``, and ``""`` for none or dimensionless."""
    unit = getattr(param, "unit", param)
    text = "" if unit is None else str(unit)
    return "" if text in ("", "dimensionless") else text


def printable(text):
    """``text`` with control characters (terminal escape sequences among them) shown escaped,
    e.g. ESC as \\x1b, so that a name read from a file cannot drive the terminal."""
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)
