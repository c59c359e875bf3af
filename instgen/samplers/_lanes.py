"""Compiled kernels behind ``fast-sa`` (private; see :mod:`instgen.samplers.fast_sa`).

Sequential order runs ``LANES`` replicas side by side: spins, local fields and
generator states are ``(n, LANES)`` arrays, and every spin update is one loop
over the lanes that the compiler turns into vector instructions.  Each lane
is an ordinary single-spin Metropolis chain with its own random numbers; the
lanes only share the order in which spins are visited, which in sequential
order is the same for every replica anyway.  This kernel works in single
precision (couplings, fields and acceptance probabilities to about 1e-7
relative; uniforms on a 2^-31 grid) so one vector instruction covers twice the
replicas; energies handed back are recomputed in double precision.

Random order cannot keep lanes in step (each replica picks its own spins), so
it runs one replica at a time in double precision, with a precomputed
acceptance table when the couplings and fields are whole multiples of one step.

All kernels live in this one file on purpose: numba's on-disk cache (``cache=True``)
notices edits to the file that holds a function, not to helpers in other files.

Random numbers: every replica has its own generator seeded from (seed, read
index) through a 64-bit mixing function, so read r of a candidate gets the same
stream whatever else is in the call: a 128-bit xorshift-add generator (the
family the reference annealer uses; uniforms from the top 52 bits) in random
order, xoshiro128++ (four 32-bit words, so it vectorises with the float lanes)
in sequential order.
"""

from __future__ import annotations

import math

import llvmlite.binding as llvm
import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

#: Replicas advanced together by one vectorised loop (a compile-time constant).
LANES = 64

_U = np.uint64
_S23, _S17, _S26, _S12 = _U(23), _U(17), _U(26), _U(12)
_S30, _S27, _S31, _S32 = _U(30), _U(27), _U(31), _U(32)
_GOLDEN = _U(0x9E3779B97F4A7C15)
_MIX1, _MIX2 = _U(0xBF58476D1CE4E5B9), _U(0x94D049BB133111EB)
_STREAM = _U(0xD1B54A32D192ED03)
_ONE_EXP = _U(0x3FF0000000000000)
_LOW32 = _U(0xFFFFFFFF)

#: Random order: exp(-x) is taken as 0 beyond this (e^-40 = 4e-18, far below the 2^-52 grid of uniforms).
X_MAX = 40.0


def _reinterpret(source, target, llvm_type, doc):
    """A compiled function that reads a ``source`` value's bits as a ``target`` (no conversion)."""
    def cast(typingctx, x):
        def codegen(context, builder, signature, args):
            return builder.bitcast(args[0], llvm_type)

        return target(source), codegen

    cast.__doc__ = doc
    return intrinsic(cast)


_bits_to_float = _reinterpret(types.uint64, types.float64, ir.DoubleType(), "uint64 bits as a float64")


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


# ------------------------------------------------------------ sequential order
# The lane kernel works in single precision so that one vector instruction covers
# twice as many replicas, and it is compiled with the loop vectoriser forced to
# WIDTH lanes (one AVX-512 register of floats, two AVX2 registers): measured on
# an AVX-512 Xeon, 1.4x faster than the vectoriser's own choice (benchmarks/kernel.py).
#: Vector width the sequential-order kernel is compiled for (float32 lanes per loop step).
WIDTH = 16
#: Local fields are recomputed from scratch every this many sweeps (bounds rounding drift).
REFRESH = 64
_F = np.float32
_U32 = np.uint32
#: exp(-x) is taken as 0 beyond this: e^-21.5 = 4.6e-10 is below the 2^-31 grid of the uniforms.
X_MAX_LANES = 21.5
_X_MAX32 = _F(X_MAX_LANES)
_LOG2E32 = _F(1.4426950408889634)
_LN2_HI32 = _F(0.693145751953125)  # ln 2 split so kf * _LN2_HI32 is exact for |k| < 2^11
_LN2_LO32 = _F(1.428606765330187e-06)
_C32 = [_F((-1.0) ** k / math.factorial(k)) for k in range(8)]
_D0, _D1, _D2, _D3, _D4, _D5, _D6, _D7 = _C32
_MAGIC32 = _F(12582912.0)  # 1.5 * 2^23: adding it rounds to an integer held in the low mantissa bits
_MAGIC_BITS = _U32(0x4B400000)
_ONE_BITS32 = _U32(0x3F800000)
_ZERO32, _ONE32, _MONE32, _MTWO32 = _F(0.0), _F(1.0), _F(-1.0), _F(-2.0)
_TWO_M31 = _F(2.0 ** -31)
_LOW32_64 = _U(0xFFFFFFFF)
_R1, _R7, _R9, _R11, _R23, _R31 = _U32(1), _U32(7), _U32(9), _U32(11), _U32(23), _U32(31)


_bits_to_float32 = _reinterpret(types.uint32, types.float32, ir.FloatType(), "uint32 bits as a float32")
_float32_to_bits = _reinterpret(types.float32, types.uint32, ir.IntType(32), "float32 bits as a uint32")


@nb.njit(inline="always", fastmath={"contract"}, cache=True)
def exp_neg32(x):
    """exp(-x) in single precision for 0 <= x <= X_MAX_LANES, relative error below 2e-7, branch-free.

    x log2(e) = k + r' with integer k (rounded by adding 1.5 * 2^23, so k never
    leaves the float unit); exp(-r) for |r| <= ln2/2 by its degree-7 Taylor
    polynomial (Estrin's scheme); 2^-k written into the exponent bits.
    """
    v = x * _LOG2E32 + _MAGIC32
    kf = v - _MAGIC32
    scale = _bits_to_float32(_U32(_ONE_BITS32 - _U32(_U32(_float32_to_bits(v) - _MAGIC_BITS) << _R23)))
    r = (x - kf * _LN2_HI32) - kf * _LN2_LO32
    r2 = r * r
    s0 = (_D0 + _D1 * r) + (_D2 + _D3 * r) * r2
    s1 = (_D4 + _D5 * r) + (_D6 + _D7 * r) * r2
    return (s0 + s1 * (r2 * r2)) * scale


@nb.njit(inline="always", cache=True)
def _rotl32(x, k):
    return _U32((x << k) | (x >> (_U32(32) - k)))


@nb.njit(inline="always", cache=True)
def _xoshiro_step(q0, q1, q2, q3, r):
    """Advance lane r's xoshiro128++ generator (state words q0..q3[r]); returns 32 random bits."""
    x0, x1, x2, x3 = q0[r], q1[r], q2[r], q3[r]
    x = _U32(_rotl32(_U32(x0 + x3), _R7) + x0)
    t = _U32(x1 << _R9)
    x2 ^= x0
    x3 ^= x1
    x1 ^= x2
    x0 ^= x3
    x2 ^= t
    q0[r], q1[r], q2[r], q3[r] = x0, x1, x2, _rotl32(x3, _R11)
    return x


def _vectorised(signature, width, **flags):
    """``numba.njit(signature, **flags)``, compiled now with LLVM's vectoriser forced to ``width`` lanes.

    The LLVM option is process-wide, so it is set only while this one kernel
    compiles (an explicit signature compiles, or loads from the disk cache, at
    definition) and reset to its default (0, the vectoriser's own choice) after.
    """
    def decorate(fn):
        llvm.set_option("", f"--force-vector-width={width}")
        try:
            return nb.njit(signature, **flags)(fn)
        finally:
            llvm.set_option("", "--force-vector-width=0")
    return decorate


_LANES_SIG = types.void(
    types.Array(types.int64, 1, "C"), types.Array(types.int64, 1, "C"),
    types.Array(types.float32, 2, "C"), types.Array(types.float32, 2, "C"),
    types.Array(types.float64, 1, "C", readonly=True), types.int64, types.Array(types.int64, 1, "C"),
    types.Array(types.int8, 3, "C"))


@nb.njit(cache=True)
def _seed_lanes(seed, first_read, q0, q1, q2, q3):
    """Per-lane generator states (four 32-bit words) for reads first_read .. first_read + LANES - 1."""
    for r in range(LANES):
        a, b = _stream_state(seed, first_read + r)
        q0[r] = _U32(a & _LOW32_64)
        q1[r] = _U32(a >> _S32)
        q2[r] = _U32(b & _LOW32_64)
        q3[r] = _U32(b >> _S32)


@_vectorised(_LANES_SIG, WIDTH, cache=True, fastmath={"contract"})
def anneal_lanes(indptr, indices, weights, fields, betas, reads, seeds, out):
    """Sequential-order Metropolis annealing, LANES replicas per block, in single precision.

    indptr (n+1,) int64, indices (nnz,) int64: the shared CSR graph.
    weights (C, nnz), fields (C, n) float32: one row per candidate.
    betas (T,) float64, read-only; seeds (C,) int64; out (C, reads, n) int8 is filled.

    Each lane has its own xoshiro128++ generator (four 32-bit words), seeded
    from (seed, read).  A proposal is accepted when y = max(0, beta dE) is 0 or
    u < exp(-y), with u on the 2^-31 grid and exp(-y) taken as 0 beyond
    X_MAX_LANES.  Local fields are kept in single precision and recomputed from
    scratch every REFRESH sweeps.
    """
    C, n = fields.shape
    s = np.empty((n, LANES), np.float32)
    f = np.empty((n, LANES), np.float32)
    d = np.empty(LANES, np.float32)
    q0 = np.empty(LANES, np.uint32)
    q1 = np.empty(LANES, np.uint32)
    q2 = np.empty(LANES, np.uint32)
    q3 = np.empty(LANES, np.uint32)
    blocks = (reads + LANES - 1) // LANES
    for c in range(C):
        w = weights[c]
        h = fields[c]
        for blk in range(blocks):
            _seed_lanes(seeds[c], blk * LANES, q0, q1, q2, q3)
            for i in range(n):
                for r in range(LANES):
                    x = _xoshiro_step(q0, q1, q2, q3, r)
                    s[i, r] = _ONE32 if (x >> _R31) else _MONE32
            for sweep in range(betas.shape[0]):
                if sweep % REFRESH == 0:
                    for i in range(n):
                        for r in range(LANES):
                            f[i, r] = h[i]
                        for k in range(indptr[i], indptr[i + 1]):
                            j = indices[k]
                            wk = w[k]
                            for r in range(LANES):
                                f[i, r] += wk * s[j, r]
                m2b = _F(-2.0 * betas[sweep])
                for i in range(n):
                    for r in range(LANES):
                        x = _xoshiro_step(q0, q1, q2, q3, r)
                        si = s[i, r]
                        # y = beta * dE with dE = -2 s_i f_i, clamped to [0, X_MAX_LANES]
                        y = min(max(m2b * si * f[i, r], _ZERO32), _X_MAX32)
                        p = exp_neg32(y) if y < _X_MAX32 else _ZERO32
                        u = _F(np.int32(x >> _R1)) * _TWO_M31
                        dd = _MTWO32 * si if (y <= _ZERO32) | (u < p) else _ZERO32
                        s[i, r] = si + dd
                        d[r] = dd
                    moved = False
                    for r in range(LANES):
                        moved |= d[r] != _ZERO32
                    if not moved:
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


# ------------------------------------------------------------ random order
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
