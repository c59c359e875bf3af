import numpy as np
import pytest


@pytest.fixture
def rng():
    return np.random.default_rng(12345)


def random_states(rng, r, n):
    return (2 * rng.integers(0, 2, size=(r, n)) - 1).astype(np.int8)
