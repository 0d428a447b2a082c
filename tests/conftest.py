"""Test set-up: float64 and strict dtype promotion for every test (style: precision at the entry points)."""

import jax
import pytest

jax.config.update("jax_enable_x64", True)


@pytest.fixture(autouse=True)
def _strict_promotion():
    with jax.numpy_dtype_promotion("strict"):
        yield
