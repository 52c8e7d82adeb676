"""Shared test settings: property tests are derandomised under CI so that a run is
reproducible; locally they explore new examples each time."""

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
