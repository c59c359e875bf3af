"""Seeds normalised in one place.

Every random entry point takes ``seed`` as ``None``, an int, a
:class:`numpy.random.SeedSequence` or a :class:`numpy.random.Generator`, and
calls :func:`as_generator`.  Seeds handed to compiled samplers come from
:func:`derive_seed`, which mixes a run seed with any number of keys (generation,
genome hash, ...) and stays below 2**31, so serial, pooled and cluster runs
draw the same numbers whatever order the work is done in.
"""

from __future__ import annotations

import hashlib

import numpy as np

from .errors import InputError

SeedLike = None | int | np.random.SeedSequence | np.random.Generator

#: Largest seed (exclusive) that compiled samplers accept.
SEED_LIMIT = 2**31


def as_generator(seed: SeedLike = None) -> np.random.Generator:
    """Return a numpy Generator for ``seed``.

    >>> as_generator(1).integers(10) == as_generator(1).integers(10)
    True
    """
    if isinstance(seed, np.random.Generator):
        return seed
    if isinstance(seed, np.random.SeedSequence):
        return np.random.default_rng(seed)
    if seed is None or (isinstance(seed, (int, np.integer)) and not isinstance(seed, bool)):
        if seed is not None and seed < 0:
            raise InputError(f"seed must be a non-negative integer, got {seed}")
        return np.random.default_rng(seed)
    raise InputError(f"seed must be an integer, SeedSequence or Generator, got {type(seed).__name__}")


def _key_int(key) -> int:
    if isinstance(key, (int, np.integer)) and not isinstance(key, bool):
        return int(key) & 0xFFFFFFFFFFFFFFFF
    data = key if isinstance(key, bytes) else str(key).encode()
    return int.from_bytes(hashlib.blake2b(data, digest_size=8).digest(), "little")


def derive_seed(seed: int, *keys) -> int:
    """A seed below 2**31 derived from ``seed`` and ``keys`` (ints, strings or bytes).

    The same inputs always give the same output; different keys give
    independent streams (numpy SeedSequence mixing).

    >>> derive_seed(7, "gen", 3) == derive_seed(7, "gen", 3)
    True
    """
    if isinstance(seed, np.random.Generator):
        seed = int(seed.integers(SEED_LIMIT))
    if isinstance(seed, np.random.SeedSequence):
        seed = int(seed.generate_state(1)[0])
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed must be a non-negative integer, got {seed!r}")
    entropy = [_key_int(seed)] + [_key_int(k) for k in keys]
    state = np.random.SeedSequence(entropy).generate_state(1, dtype=np.uint32)[0]
    return int(state) % SEED_LIMIT
