"""Test-wide strictness: 64-bit JAX on the CPU, warnings are errors (pyproject), reproducible keys."""

import numpy as np
import pytest

import invdesign._jaxsetup  # noqa: F401  (CPU + x64 before anything else touches jax)


@pytest.fixture
def rng():
    """A reproducible NumPy generator; each test gets the same stream."""
    return np.random.default_rng(20261202)
