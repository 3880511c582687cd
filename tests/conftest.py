"""Suite-wide settings: float64, strict promotion, warnings as errors."""

import jax
import pytest

import adlin  # noqa: F401  (switches float64 on; see adlin/_config.py)

jax.config.update("jax_numpy_dtype_promotion", "standard")
jax.config.update("jax_numpy_rank_promotion", "raise")


@pytest.fixture
def rng():
    import numpy as np

    return np.random.default_rng(20261202)
