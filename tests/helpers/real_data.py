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
