"""Test-suite settings shared by every test module.

Hypothesis runs derandomized everywhere (the same examples on every run), so CI results do not
depend on the draw; the properties were also run with random draws while they were written.
"""

from hypothesis import settings

settings.register_profile("curvespeed", derandomize=True, deadline=None)
settings.load_profile("curvespeed")

# the real local Dask cluster of the batch tests, shared by their modules
from batch_helpers import dask_client  # noqa: E402,F401
