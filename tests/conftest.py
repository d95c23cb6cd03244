"""Test-session settings shared by every test file."""

import os

import matplotlib
import pytest

matplotlib.use("Agg")

from hypothesis import settings  # noqa: E402

from tests.helpers.real_data import REAL_DATA  # noqa: E402

# On CI the property-based tests draw the same examples every run (derandomised), so a result
# there is reproducible; on a developer's machine they explore new examples each time.
# UVFIT_HYPOTHESIS_PROFILE names the profile (.ci/run sets it to "ci"); CI=true alone still works.
settings.register_profile("ci", derandomize=True, deadline=None)
_PROFILE = os.environ.get("UVFIT_HYPOTHESIS_PROFILE") or ("ci" if os.environ.get("CI") else None)
if _PROFILE:
    settings.load_profile(_PROFILE)


@pytest.fixture(scope="session")
def real_data():
    """The folder of the real 3C 279 test data (tests/data/3c279, part of the repository)."""
    assert REAL_DATA.is_dir(), f"{REAL_DATA} is missing: the checkout is incomplete"
    return REAL_DATA
