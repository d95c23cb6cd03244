"""Test-session settings shared by every test file."""
import os

import matplotlib

matplotlib.use("Agg")

from hypothesis import settings  # noqa: E402

# On CI the property-based tests draw the same examples every run (derandomised), so a result
# there is reproducible; on a developer's machine they explore new examples each time.
settings.register_profile("ci", derandomize=True, deadline=None)
if os.environ.get("CI"):
    settings.load_profile("ci")
