"""Where the real test data live: ``tests/data/3c279`` (see its ABOUT.md for source and licence).

The files are part of the repository, so a test that needs them never skips; a missing file is a
broken checkout and fails loudly.
"""

from pathlib import Path

#: the folder of the two 3C 279 UVFITS files and their CSV exports
REAL_DATA = Path(__file__).resolve().parents[1] / "data" / "3c279"


def real_file(band, suffix="uvfits"):
    """The 3C 279 file of ``band`` ("lo" or "hi") with ``suffix`` ("uvfits" or "csv")."""
    return REAL_DATA / f"SR1_3C279_2017_095_{band}_hops_netcal_StokesI.{suffix}"


def two_gaussians(east=-20.0, north=-20.0):
    """The start model of the two-Gaussian fits of the 3C 279 files: a Gaussian "a" at the origin
    and a fainter Gaussian "b" at (east, north) microarcseconds (start values, not a reference)."""
    from uvfit.sky.model import SkyModel

    gaussian = {"shape": "gaussian", "fwhm": {"value": 20.0, "min": 0.0, "max": 200.0}}
    return SkyModel.build(
        [
            {"name": "a", "flux": 8.0, "east": 0.0, "north": 0.0, **gaussian},
            {"name": "b", "flux": {"value": 3.0, "min": 0.0}, "east": east, "north": north, **gaussian},
        ],
        angular_unit="uas",
    )
