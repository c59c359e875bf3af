"""Compiled multi-spin-coded kernel behind ``packed-sa`` (private; see
:mod:`instgen.samplers.packed_sa` for what it does and what it guarantees).

Bit layout: bit l of word ``b[i]`` is replica l's spin i, 1 meaning s = -1.
A coupling term J s_i s_j is "unsatisfied" (contributes +|J|) exactly where
``b[i] ^ b[j] ^ pos`` has a 1, with ``pos`` all ones for J > 0 and zero for
J < 0; a field term h s_i likewise with ``b[i] ^ hpos``.  Summing |J| over the
unsatisfied terms of spin i gives K (kept as bit planes: plane t holds bit t
of K for all 64 replicas), and flipping spin i costs dE = 2 (W - 2K), where W
is the sum of |J| and |h| at i.

Kept in its own file with its own generator helpers because numba's disk cache
only notices edits to the file that holds a function.
"""

from __future__ import annotations

import numba as nb
import numpy as np

_U = np.uint64
ONES = _U(0xFFFFFFFFFFFFFFFF)
_ZERO = _U(0)
_ONE = _U(1)
_S17, _S47, _S49, _S15, _S21, _S28, _S36 = _U(17), _U(47), _U(49), _U(15), _U(21), _U(28), _U(36)
_S30, _S27, _S31, _S32, _S58, _S63 = _U(30), _U(27), _U(31), _U(32), _U(58), _U(63)
_W64 = _U(64)
_TOP_BIT = _U(0x8000000000000000)
_LOW58 = _U(0x03FFFFFFFFFFFFFF)
_LOW32 = _U(0xFFFFFFFF)
_GOLDEN = _U(0x9E3779B97F4A7C15)
_MIX1, _MIX2 = _U(0xBF58476D1CE4E5B9), _U(0x94D049BB133111EB)
_STREAM = _U(0xD1B54A32D192ED03)
_TWO64 = 18446744073709551616.0
_BELOW_TWO64 = 1.8446744073709550e19

#: Most bit planes for K (so W, the sum of |J| and |h| at one spin, stays below 2**MAX_PLANES).
MAX_PLANES = 8
#: Planes the fast path for unit weights keeps in registers.
UNIT_PLANES = 5


@nb.njit(inline="always", cache=True)
def _mix64(z):
    z = (z ^ (z >> _S30)) * _MIX1
    z = (z ^ (z >> _S27)) * _MIX2
    return z ^ (z >> _S31)


@nb.njit(inline="always", cache=True)
def _word_state(seed, word):
    base = _U(seed) * _GOLDEN + _U(word + 1) * _STREAM
    a = _mix64(base)
    b = _mix64(base + _GOLDEN)
    if a == 0 and b == 0:
        b = _GOLDEN
    return a, b


@nb.njit(inline="always", cache=True)
def _next(s0, s1):
    """One step of a 128-bit xor-rotate-add generator (all 64 output bits usable)."""
    x = s0 + s1
    out = ((x << _S17) | (x >> _S47)) + s0
    s1 ^= s0
    n0 = ((s0 << _S49) | (s0 >> _S15)) ^ s1 ^ (s1 << _S21)
    n1 = (s1 << _S28) | (s1 >> _S36)
    return n0, n1, out


@nb.njit(cache=True)
def _count_weighted(b, bi, i, lo, hi, indices, cp, wc, hp, hwc, planes, pl):
    """Bit planes of K = sum of |J| (and |h|) over the unsatisfied terms of spin i (any weights)."""
    for q in range(MAX_PLANES):
        pl[q] = _ZERO
    for k in range(lo, hi + _ONE):
        if k < hi:
            x = bi ^ b[indices[k]] ^ cp[k]
            a = wc[k]
        else:
            x = bi ^ hp[i]
            a = hwc[i]
        q = 0
        while a:
            if a & 1:
                carry = x
                for tq in range(q, planes):
                    y = pl[tq] & carry
                    pl[tq] ^= carry
                    carry = y
            a >>= 1
            q += 1


@nb.njit(cache=True)
def anneal_packed(indptr, indices, cpos, wt, hpos, hw, W, planes, unit, betas, reads, seeds,
                  random_order, shared, out):
    """Anneal ``reads`` replicas per candidate, 64 per machine word.

    indptr (n+1,) uint64, indices (nnz,) uint32: shared CSR graph (unsigned, so
    array lookups need no negative-index fix-ups).
    cpos (C, nnz) uint64: all ones where J > 0.  wt (C, nnz) int64: |J|.
    hpos (C, n) uint64: all ones where h > 0.  hw (C, n) int64: |h|.  W (C, n): sums.
    planes: bit planes needed (<= MAX_PLANES; <= UNIT_PLANES when ``unit``).
    unit: every |J| is 1 and every |h| is 0 or 1 (the register fast path).
    random_order: visit n random spins per sweep (one sequence per word) instead of 0..n-1.
    shared: one uniform per word and spin visit, spread over the 64 replicas by
    fixed offsets l/64; otherwise every replica draws its own bits.
    out (C, reads, n) int8 is filled.
    """
    C, n = W.shape
    T = betas.shape[0]
    words = (reads + 63) // 64
    wmax = 1
    for c in range(C):
        for i in range(n):
            wmax = max(wmax, W[c, i])
    p64 = np.zeros((T, wmax + 1), np.uint64)
    for t in range(T):
        for d in range(1, wmax + 1):
            v = np.exp(-2.0 * betas[t] * d) * _TWO64
            p64[t, d] = _U(v) if v < _BELOW_TWO64 else _U(0xFFFFFFFFFFFFF800)
    b = np.empty(n, np.uint64)
    pl = np.zeros(MAX_PLANES, np.uint64)
    mk = np.empty(128, np.uint64)
    pk = np.empty(128, np.uint64)
    nn = _U(n)
    thresh = (_ONE << _S32) % nn
    for c in range(C):
        cp = cpos[c]
        wc = wt[c]
        hp = hpos[c]
        hwc = hw[c]
        Wc = W[c]
        for word in range(words):
            s0, s1 = _word_state(seeds[c], word)
            for i in range(n):
                s0, s1, r = _next(s0, s1)
                b[i] = r
            for t in range(T):
                for step in range(n):
                    if random_order:
                        while True:
                            s0, s1, r = _next(s0, s1)
                            prod = (r >> _S32) * nn
                            if (prod & _LOW32) >= thresh:
                                break
                        i = prod >> _S32
                    else:
                        i = _U(step)
                    bi = b[i]
                    lo, hi = indptr[i], indptr[i + _ONE]
                    p0 = p1 = p2 = p3 = p4 = _ZERO
                    if unit:
                        # add one unsatisfied-term bit per coupling (and field) to the planes
                        if planes <= 3:
                            for k in range(lo, hi):
                                x = bi ^ b[indices[k]] ^ cp[k]
                                y = p0 & x
                                p0 ^= x
                                p2 ^= p1 & y
                                p1 ^= y
                        elif planes == 4:
                            for k in range(lo, hi):
                                x = bi ^ b[indices[k]] ^ cp[k]
                                y = p0 & x
                                p0 ^= x
                                x = p1 & y
                                p1 ^= y
                                p3 ^= p2 & x
                                p2 ^= x
                        else:
                            for k in range(lo, hi):
                                x = bi ^ b[indices[k]] ^ cp[k]
                                y = p0 & x
                                p0 ^= x
                                x = p1 & y
                                p1 ^= y
                                y = p2 & x
                                p2 ^= x
                                p4 ^= p3 & y
                                p3 ^= y
                        if hwc[i]:
                            x = bi ^ hp[i]
                            y = p0 & x
                            p0 ^= x
                            x = p1 & y
                            p1 ^= y
                            y = p2 & x
                            p2 ^= x
                            p4 ^= p3 & y
                            p3 ^= y
                        wi = Wc[i]
                        h_ = (wi + 1) >> 1
                        # borrow out of K - ceil(W/2): set where dE > 0 (the flip needs luck)
                        bo = ~p0 if h_ & 1 else _ZERO
                        bo = (~p1 | bo) if h_ & 2 else (~p1 & bo)
                        bo = (~p2 | bo) if h_ & 4 else (~p2 & bo)
                        bo = (~p3 | bo) if h_ & 8 else (~p3 & bo)
                        bo = (~p4 | bo) if h_ & 16 else (~p4 & bo)
                        if bo:
                            for kk in range(h_):
                                mk[kk] = ((p0 if kk & 1 else ~p0) & (p1 if kk & 2 else ~p1) & (p2 if kk & 4 else ~p2)
                                          & (p3 if kk & 8 else ~p3) & (p4 if kk & 16 else ~p4))
                    else:
                        _count_weighted(b, bi, i, lo, hi, indices, cp, wc, hp, hwc, planes, pl)
                        wi = Wc[i]
                        h_ = (wi + 1) >> 1
                        bo = _ZERO
                        for q in range(planes):
                            bo = (~pl[q] | bo) if (h_ >> q) & 1 else (~pl[q] & bo)
                        if bo:
                            for kk in range(h_):
                                m = ONES
                                for q in range(planes):
                                    m &= pl[q] if (kk >> q) & 1 else ~pl[q]
                                mk[kk] = m
                    acc = ~bo
                    if bo:
                        anyp = _ZERO
                        for kk in range(h_):
                            pk[kk] = p64[t, wi - 2 * kk]
                            anyp |= pk[kk]
                        if shared:
                            # replica l uses u_l = frac(u + l/64): accept where u_l < p
                            s0, s1, r = _next(s0, s1)
                            rho = r & _LOW58
                            rot = (_W64 - (r >> _S58)) & _S63
                            for kk in range(h_):
                                thr = pk[kk]
                                if thr > rho:
                                    cnt = ((thr - rho - _ONE) >> _S58) + _ONE
                                    low = ONES if cnt >= _W64 else (_ONE << cnt) - _ONE
                                    low = (low << rot) | (low >> ((_W64 - rot) & _S63))
                                    acc |= mk[kk] & low
                        else:
                            # each replica compares its own random bits with p, most
                            # significant first, until every undecided replica is decided
                            lt = _ZERO
                            e = bo
                            bit = _TOP_BIT
                            while e and bit:
                                s0, s1, r = _next(s0, s1)
                                if anyp & bit:
                                    pb = _ZERO
                                    for kk in range(h_):
                                        if pk[kk] & bit:
                                            pb |= mk[kk]
                                    lt |= e & ~r & pb
                                    e &= ~(r ^ pb)
                                else:
                                    e &= ~r
                                bit >>= _ONE
                            acc |= lt
                    b[i] = bi ^ acc
            base = word * 64
            for l in range(min(64, reads - base)):
                sh = _U(l)
                for i in range(n):
                    out[c, base + l, i] = -1 if (b[i] >> sh) & _ONE else 1
