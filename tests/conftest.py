"""Shared test settings.

Hypothesis runs derandomized (a fixed seed per test), so every statistical or
property test is reproducible; failures print the example that replays them.
"""

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

settings.register_profile(
    "boundbreaker", deadline=None, derandomize=True, print_blob=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "boundbreaker"))


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
