"""Compiled kernels behind ``fast-sa`` (private; see :mod:`instgen.samplers.fast_sa`).

Sequential order runs ``LANES`` replicas side by side: spins, local fields and
generator states are ``(n, LANES)`` arrays, and every spin update is one loop
over the lanes that the compiler turns into vector instructions.  Each lane
is an ordinary single-spin Metropolis chain with its own random numbers; the
lanes only share the order in which spins are visited, which in sequential
order is the same for every replica anyway.

Random order cannot keep lanes in step (each replica picks its own spins), so
it runs one replica at a time, with a precomputed acceptance table when the
couplings and fields are whole multiples of one step.

All kernels live in this one file on purpose: numba's on-disk cache (``cache=True``)
notices edits to the file that holds a function, not to helpers in other files.

Random numbers: one 128-bit xorshift-add generator per replica (the same family
the reference annealer uses), seeded from (seed, read index) through a
64-bit mixing function, so read r of a candidate gets the same stream whatever
else is in the call.  Uniforms take the top 52 bits.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

#: Replicas advanced together by one vectorised loop (a compile-time constant).
LANES = 64

_U = np.uint64
_S23, _S17, _S26, _S12, _S52 = _U(23), _U(17), _U(26), _U(12), _U(52)
_S30, _S27, _S31, _S32 = _U(30), _U(27), _U(31), _U(32)
_GOLDEN = _U(0x9E3779B97F4A7C15)
_MIX1, _MIX2 = _U(0xBF58476D1CE4E5B9), _U(0x94D049BB133111EB)
_STREAM = _U(0xD1B54A32D192ED03)
_ONE_EXP = _U(0x3FF0000000000000)
_LOW32 = _U(0xFFFFFFFF)

#: exp(-x) is taken as 0 beyond this (e^-40 = 4e-18, far below the 2^-52 grid of uniforms).
X_MAX = 40.0
_LOG2E = 1.4426950408889634
_LN2_HI = 0.6931471803691238
_LN2_LO = 1.9082149292705877e-10
_C = [(-1.0) ** k / math.factorial(k) for k in range(12)]
_C0, _C1, _C2, _C3, _C4, _C5, _C6, _C7, _C8, _C9, _C10, _C11 = _C


@intrinsic
def _bits_to_float(typingctx, x):
    """Reinterpret the 64 bits of a uint64 as a float64 (no conversion)."""
    sig = types.float64(types.uint64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.DoubleType())

    return sig, codegen


@nb.njit(inline="always", fastmath={"contract"}, cache=True)
def exp_neg(x):
    """exp(-x) for 0 <= x <= X_MAX, relative error below 1e-14, branch-free.

    x = k ln2 + r with |r| <= ln2/2; exp(-r) by its degree-11 Taylor polynomial
    (Estrin's scheme, short dependency chains); 2^-k written into the exponent bits.
    """
    k = np.int64(x * _LOG2E + 0.5)
    kf = np.float64(k)
    r = (x - kf * _LN2_HI) - kf * _LN2_LO
    r2 = r * r
    r4 = r2 * r2
    s0 = (_C0 + _C1 * r) + (_C2 + _C3 * r) * r2
    s1 = (_C4 + _C5 * r) + (_C6 + _C7 * r) * r2
    s2 = (_C8 + _C9 * r) + (_C10 + _C11 * r) * r2
    p = (s0 + s1 * r4) + s2 * (r4 * r4)
    return p * _bits_to_float(_U(1023 - k) << _S52)


@nb.njit(inline="always", cache=True)
def _mix64(z):
    z = (z ^ (z >> _S30)) * _MIX1
    z = (z ^ (z >> _S27)) * _MIX2
    return z ^ (z >> _S31)


@nb.njit(inline="always", cache=True)
def _stream_state(seed, read):
    """Generator state (two words, not both zero) for one read of one candidate."""
    base = _U(seed) * _GOLDEN + _U(read + 1) * _STREAM
    a = _mix64(base)
    b = _mix64(base + _GOLDEN)
    if a == 0 and b == 0:
        b = _GOLDEN
    return a, b


@nb.njit(inline="always", cache=True)
def _step(a, b):
    """One xorshift-add step: returns the new state and a 64-bit output."""
    x = a ^ (a << _S23)
    nb_ = x ^ b ^ (x >> _S17) ^ (b >> _S26)
    return b, nb_, nb_ + b


@nb.njit(inline="always", cache=True)
def _uniform(bits):
    """A uniform in [0, 1) on the 2^-52 grid from the top 52 bits."""
    return _bits_to_float((bits >> _S12) | _ONE_EXP) - 1.0


@nb.njit(cache=True, fastmath={"contract"})
def anneal_lanes(indptr, indices, weights, fields, betas, reads, seeds, out):
    """Sequential-order Metropolis annealing, LANES replicas per block.

    indptr (n+1,) int64, indices (nnz,) int64: the shared CSR graph.
    weights (C, nnz), fields (C, n) float64: one row per candidate.
    betas (T,) float64; seeds (C,) int64; out (C, reads, n) int8 is filled.
    """
    C, n = fields.shape
    s = np.empty((n, LANES))
    f = np.empty((n, LANES))
    d = np.empty(LANES)
    ra = np.empty(LANES, np.uint64)
    rb = np.empty(LANES, np.uint64)
    blocks = (reads + LANES - 1) // LANES
    for c in range(C):
        w = weights[c]
        h = fields[c]
        for blk in range(blocks):
            for r in range(LANES):
                ra[r], rb[r] = _stream_state(seeds[c], blk * LANES + r)
            for i in range(n):
                for r in range(LANES):
                    a, b, x = _step(ra[r], rb[r])
                    ra[r] = a
                    rb[r] = b
                    s[i, r] = 1.0 if (x >> _U(63)) else -1.0
            for i in range(n):
                for r in range(LANES):
                    f[i, r] = h[i]
                for k in range(indptr[i], indptr[i + 1]):
                    j = indices[k]
                    wk = w[k]
                    for r in range(LANES):
                        f[i, r] += wk * s[j, r]
            for t in range(betas.shape[0]):
                m2b = -2.0 * betas[t]
                for i in range(n):
                    flips = 0
                    for r in range(LANES):
                        a, b, x = _step(ra[r], rb[r])
                        ra[r] = a
                        rb[r] = b
                        si = s[i, r]
                        # beta * dE, dE = -2 s_i f_i; clamp so exp_neg sees [0, X_MAX]
                        y = min(max(m2b * si * f[i, r], 0.0), X_MAX)
                        p = exp_neg(y) if y < X_MAX else 0.0
                        dd = -2.0 * si if _uniform(x) < p else 0.0
                        s[i, r] = si + dd
                        d[r] = dd
                        flips += dd != 0.0
                    if flips == 0:
                        continue
                    for k in range(indptr[i], indptr[i + 1]):
                        j = indices[k]
                        wk = w[k]
                        for r in range(LANES):
                            f[j, r] += wk * d[r]
            base = blk * LANES
            for r in range(min(LANES, reads - base)):
                for i in range(n):
                    out[c, base + r, i] = 1 if s[i, r] > 0 else -1


@nb.njit(cache=True)
def anneal_random_order(indptr, indices, weights, fields, betas, reads, seeds, step, top, out):
    """Random-order Metropolis annealing, one replica at a time.

    Each sweep makes n proposals at uniformly random spins (with replacement).
    When ``step > 0`` every coupling and field is a whole multiple of ``step``,
    so beta*dE takes the values 2*beta*step*m, m = 0..top, and acceptance
    probabilities come from a table of top + 1 entries built at the start of
    every sweep; otherwise exp is evaluated for each uphill proposal.
    """
    C, n = fields.shape
    T = betas.shape[0]
    s = np.empty(n)
    f = np.empty(n)
    table = np.empty(top + 1)
    inv_step = 1.0 / step if step > 0 else 0.0
    nn = _U(n)
    thresh = (_U(1) << _S32) % nn  # values below this are redrawn (exact uniform pick)
    for c in range(C):
        w = weights[c]
        h = fields[c]
        for read in range(reads):
            a, b = _stream_state(seeds[c], read)
            for i in range(n):
                a, b, x = _step(a, b)
                s[i] = 1.0 if (x >> _U(63)) else -1.0
            for i in range(n):
                acc = h[i]
                for k in range(indptr[i], indptr[i + 1]):
                    acc += w[k] * s[indices[k]]
                f[i] = acc
            for t in range(T):
                beta = betas[t]
                if step > 0:
                    for m in range(top + 1):
                        table[m] = math.exp(-2.0 * beta * step * m)
                for _ in range(n):
                    # uniform spin index: multiply-shift on 32 bits, rejecting the biased few
                    while True:
                        a, b, x = _step(a, b)
                        prod = (x >> _S32) * nn
                        if (prod & _LOW32) >= thresh:
                            break
                    i = np.int64(prod >> _S32)
                    de = -2.0 * s[i] * f[i]
                    if de > 0.0:
                        y = beta * de
                        if y >= X_MAX:  # acceptance below e^-40: skip without a draw
                            continue
                        if step > 0:
                            p = table[min(np.int64(de * 0.5 * inv_step + 0.5), top)]
                        else:
                            p = math.exp(-y)
                        a, b, x = _step(a, b)
                        if _uniform(x) >= p:
                            continue
                    d = -2.0 * s[i]
                    s[i] = -s[i]
                    for k in range(indptr[i], indptr[i + 1]):
                        f[indices[k]] += w[k] * d
            for i in range(n):
                out[c, read, i] = 1 if s[i] > 0 else -1


@nb.njit(cache=True)
def batch_energies(ei, ej, J, h, states, out):
    """E = sum h_i s_i + sum J_e s_i s_j for states (C, R, n) int8; out (C, R)."""
    C, R, n = states.shape
    for c in range(C):
        for r in range(R):
            st = states[c, r]
            e = 0.0
            for i in range(n):
                e += h[c, i] * st[i]
            for k in range(ei.shape[0]):
                e += J[c, k] * (st[ei[k]] * st[ej[k]])
            out[c, r] = e
