"""Compiled batch energies for :meth:`instgen.instance.Instance.energies` (numba, cached on disk)."""

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def batch_energies(states, ei, ej, J, h, out):  # pragma: no cover - compiled
    """out[r] = sum_i h_i s_ri + sum_k J_k s_r,ei[k] s_r,ej[k], summed in index order."""
    R, n = states.shape
    m = J.shape[0]
    for r in range(R):
        e = 0.0
        for i in range(n):
            e += h[i] * states[r, i]
        for k in range(m):
            e += J[k] * (states[r, ei[k]] * states[r, ej[k]])
        out[r] = e


def energies(states: np.ndarray, ei: np.ndarray, ej: np.ndarray, J: np.ndarray, h: np.ndarray) -> np.ndarray:
    states = np.ascontiguousarray(states, dtype=np.int8)
    out = np.empty(states.shape[0], dtype=np.float64)
    batch_energies(states, ei, ej, J, h, out)
    return out
