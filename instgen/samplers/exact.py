"""Brute force over every state, as ground truth for small instances (n <= 24).

Returns the ``reads`` lowest-energy states in order of energy (all 2^n of
them when ``reads`` is larger), so a batch holds every ground state when there
are at most ``reads`` of them, followed by the lowest excited states.  The
seed plays no part.  Larger instances are refused up front with an estimate
of the cost.

>>> from instgen.instance import Instance
>>> from instgen.samplers import get_sampler
>>> tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0])
>>> batch = get_sampler("exact").run(tri, reads=8)
>>> batch.energies.tolist()
[-1.0, -1.0, -1.0, -1.0, -1.0, -1.0, 3.0, 3.0]
"""

from __future__ import annotations

import numpy as np

from ..errors import ResourceError
from .base import Sampler

MAX_SPINS = 24
#: Rough enumeration speed (states per second) used in the refusal message.
STATES_PER_SECOND = 1e7
#: Energies held at once while enumerating.
_BLOCK = 1 << 22


def _all_states(k: int) -> np.ndarray:
    """(2^k, k) int8: row x has spin i = +1 when bit i of x is 0, else -1."""
    x = np.arange(1 << k, dtype=np.int64)[:, None]
    bits = (x >> np.arange(k, dtype=np.int64)) & 1
    return (1 - 2 * bits).astype(np.int8)


class BruteForce(Sampler):
    """Exhaustive enumeration; refuses n > 24 with a ResourceError."""

    name = "exact"
    options = {}
    uses_schedule = False
    #: Lists the lowest states rather than sampling (no success probability).
    enumerates = True

    def _run(self, instance, schedule, reads, seed, options):
        n = instance.n
        if n > MAX_SPINS:
            states = 2.0 ** n
            seconds = states / STATES_PER_SECOND
            raise ResourceError(
                f"brute force over {n} spins means 2^{n} = {states:.3g} states, roughly "
                f"{_duration(seconds)} at about {STATES_PER_SECOND:.0e} states per second; the exact "
                f"sampler stops at {MAX_SPINS} spins (certify larger instances another way)")
        a = n // 2
        b = n - a
        keep = min(reads, 1 << n)
        e_idx = instance.edges.astype(np.int64)
        J = np.zeros((n, n))
        J[e_idx[:, 0], e_idx[:, 1]] = instance.J
        SA, SB = _all_states(a).astype(np.float64), _all_states(b).astype(np.float64)
        h = instance.h
        EA = SA @ h[:a] + np.einsum("ri,ij,rj->r", SA, J[:a, :a], SA)
        EB = SB @ h[a:] + np.einsum("ri,ij,rj->r", SB, J[a:, a:], SB)
        M = J[:a, a:] @ SB.T  # (a, 2^b)
        rows = max(1, _BLOCK >> b)
        best_e = np.empty(0)
        best_i = np.empty(0, dtype=np.int64)
        for start in range(0, 1 << a, rows):
            block = EA[start:start + rows, None] + EB[None, :] + SA[start:start + rows] @ M
            flat = block.ravel()
            idx = np.arange(start, start + block.shape[0], dtype=np.int64)[:, None] + (
                np.arange(1 << b, dtype=np.int64)[None, :] << a)
            idx = idx.ravel()
            if flat.size > keep:
                part = np.argpartition(flat, keep - 1)[:keep]
                flat, idx = flat[part], idx[part]
            best_e = np.concatenate([best_e, flat])
            best_i = np.concatenate([best_i, idx])
            if best_e.size > keep:
                part = np.argpartition(best_e, keep - 1)[:keep]
                best_e, best_i = best_e[part], best_i[part]
        order = np.lexsort((best_i, np.round(best_e, 9)))
        chosen = best_i[order]
        bits = (chosen[:, None] >> np.arange(n, dtype=np.int64)) & 1
        states = (1 - 2 * bits).astype(np.int8)
        return {"states": states, "spin_updates": 0,
                "schedule": {"kind": "exhaustive enumeration", "states": 1 << n, "lowest_kept": int(keep)}}


def _duration(seconds: float) -> str:
    for unit, size in (("years", 3.15e7), ("days", 86400.0), ("hours", 3600.0), ("minutes", 60.0)):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} seconds"
