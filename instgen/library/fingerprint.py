"""A content fingerprint that recognises the same Ising problem in another guise.

What it identifies
------------------
Two instances get the same fingerprint when one turns into the other by

* a gauge (spin-reversal) transformation: s_i -> g_i s_i, h_i -> g_i h_i,
  J_ij -> g_i g_j J_ij for any ±1 vector g (this includes the global flip,
  which maps (J, h) to (J, -h));
* listing the spins in another order: spins are identified by the labels the
  graph gave them (a Chimera linear index, a Pegasus coordinate, ...), never by
  their position in the arrays.

How
---
Spins are ranked by their label (compared as canonical JSON text).  In that
rank order a spanning forest of the non-zero couplings is grown breadth-first,
and the gauge is fixed so that every forest coupling is positive; in each
connected piece that carries a field, the remaining global flip is fixed so
that the field of its lowest-ranked spin with a field is positive.  The
forest depends only on the labelled graph, never on the couplings' signs, so
every member of a gauge class lands on the same canonical instance.  A coupling
outside the forest then carries |J| times the sign of the product of couplings
around its fundamental cycle, so the canonical form records every coupling
magnitude and the frustration of a full cycle basis: two instances on the same
labelled graph without fields share it exactly when all their cycle products
agree.  The fingerprint is the SHA-256 of that canonical form written out as
text (labels, then couplings, then fields), prefixed with a version line.

What it does not identify
-------------------------
* The same couplings moved to other labels (a Chimera instance shifted by one
  cell, or mapped by any other symmetry of the graph): graph isomorphism is not
  attempted, so these are different fingerprints.
* Rescaling (J -> cJ) or a changed constant offset: a constant is ignored
  entirely; a scale factor gives a different fingerprint.
* Couplings equal to zero are ignored (a zero coupling is the same
  Hamiltonian as a missing edge), and so are zero fields.
* Values are compared after rounding to 12 significant digits, so values that
  differ only by floating-point noise from a text round trip still match.
* The graph spec string, the planted state, certificates, scores and other
  metadata do not enter the fingerprint: they describe the instance, they do
  not make it a different problem.

Changing anything here changes every fingerprint: bump ``FINGERPRINT_VERSION``
(it is stored in each library's index) and write a library migration.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json

import numpy as np

from ..instance import Instance

FINGERPRINT_VERSION = 1

#: Significant digits kept when values are written into the canonical form.
DIGITS = 12


def label_key(label) -> str:
    """Canonical text of a spin label (tuples written as JSON lists).

    >>> label_key((0, 3)), label_key(7), label_key("a")
    ('[0,3]', '7', '"a"')
    """
    if type(label) is int:  # the common case, written as JSON would
        return str(label)

    def plain(x):
        return [plain(y) for y in x] if isinstance(x, (tuple, list)) else x

    return json.dumps(plain(label), separators=(",", ":"))


def _fmt(values: np.ndarray) -> list[str]:
    # adding 0.0 turns -0.0 into 0.0 so the sign of a zero never matters
    return [format(float(v) + 0.0, f".{DIGITS}g") for v in values]


@dataclasses.dataclass(frozen=True)
class CanonicalForm:
    """The canonical gauge and spin order of one instance.

    ``order[r]`` is the index of the spin of rank ``r``; ``gauge[i]`` (±1, by
    index) takes the instance to its canonical gauge.  Use
    :meth:`to_canonical` / :meth:`from_canonical` to carry states between two
    instances with the same fingerprint.
    """

    fingerprint: str
    order: np.ndarray
    gauge: np.ndarray

    def to_canonical(self, state) -> np.ndarray:
        """A state of the instance, in canonical rank order and gauge."""
        s = np.asarray(state, dtype=np.int8)
        return (s * self.gauge)[self.order]

    def from_canonical(self, state) -> np.ndarray:
        """Inverse of :meth:`to_canonical`."""
        out = np.empty(len(self.order), dtype=np.int8)
        out[self.order] = np.asarray(state, dtype=np.int8)
        return (out * self.gauge).astype(np.int8)


def canonical_form(inst: Instance) -> CanonicalForm:
    """Canonical spin order, canonical gauge and fingerprint of an instance.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> from instgen.instance import random_gauge
    >>> a = make_instance("chimera:1", "gaussian", seed=2)
    >>> b = a.gauge(random_gauge(a.n, seed=5))
    >>> canonical_form(a).fingerprint == canonical_form(b).fingerprint
    True
    """
    n = inst.n
    keys = [label_key(x) for x in inst.labels]
    order = np.array(sorted(range(n), key=keys.__getitem__), dtype=np.int64)
    rank = np.empty(n, dtype=np.int64)
    rank[order] = np.arange(n)

    keep = inst.J != 0
    a, b = rank[inst.edges[keep, 0]], rank[inst.edges[keep, 1]]
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    J = inst.J[keep]
    e_order = np.lexsort((hi, lo))
    lo, hi, J = lo[e_order], hi[e_order], J[e_order]
    h = inst.h[order]  # fields by rank

    # adjacency in rank space, neighbours sorted by rank
    rows = np.concatenate([lo, hi])
    cols = np.concatenate([hi, lo])
    vals = np.concatenate([J, J])
    adj_order = np.lexsort((cols, rows))
    rows, cols, vals = rows[adj_order], cols[adj_order], vals[adj_order]
    indptr = np.searchsorted(rows, np.arange(n + 1))
    cols_l, sign_l = cols.tolist(), np.sign(vals).astype(np.int64).tolist()

    g = [0] * n  # gauge by rank; 0 = not reached yet
    for root in range(n):
        if g[root]:
            continue
        g[root] = 1
        component, queue = [root], [root]
        while queue:
            nxt = []
            for u in queue:
                for k in range(indptr[u], indptr[u + 1]):
                    v = cols_l[k]
                    if not g[v]:
                        g[v] = g[u] * sign_l[k]
                        component.append(v)
                        nxt.append(v)
            queue = nxt
        first = next((r for r in sorted(component) if h[r] != 0), None)
        if first is not None and g[first] * h[first] < 0:
            for r in component:
                g[r] = -g[r]
    g_rank = np.asarray(g, dtype=np.int8)

    Jc = J * g_rank[lo] * g_rank[hi]
    hc = h * g_rank
    field_ranks = np.flatnonzero(hc != 0)

    lines = [f"instgen-fingerprint {FINGERPRINT_VERSION}", f"spins {n}",
             "labels " + ",".join(keys[i] for i in order)]
    lines += map("J {} {} {}".format, lo.tolist(), hi.tolist(), _fmt(Jc))
    lines += map("h {} {}".format, field_ranks.tolist(), _fmt(hc[field_ranks]))
    digest = hashlib.sha256(("\n".join(lines) + "\n").encode())

    gauge = np.empty(n, dtype=np.int8)
    gauge[order] = g_rank
    return CanonicalForm(digest.hexdigest(), order, gauge)


def fingerprint(inst: Instance) -> str:
    """The 64-hex-digit fingerprint of an instance (see the module docstring).

    >>> from instgen.make import make_instance
    >>> len(fingerprint(make_instance("chimera:1", seed=1)))
    64
    """
    return canonical_form(inst).fingerprint


def carry_state(state, source: Instance | CanonicalForm, target: Instance | CanonicalForm) -> np.ndarray:
    """Carry a state of ``source`` over to ``target`` (same fingerprint).

    The result has the same energy on ``target`` as ``state`` has on
    ``source`` (up to a flip of field-free connected pieces, which changes no
    energy).

    >>> from instgen.make import make_instance
    >>> from instgen.instance import random_gauge
    >>> a = make_instance("chimera:1", "gaussian", seed=2)
    >>> b = a.gauge(random_gauge(a.n, seed=5))
    >>> s = np.ones(a.n, dtype=np.int8)
    >>> bool(np.isclose(b.energy(carry_state(s, a, b)), a.energy(s)))
    True
    """
    src = source if isinstance(source, CanonicalForm) else canonical_form(source)
    dst = target if isinstance(target, CanonicalForm) else canonical_form(target)
    if src.fingerprint != dst.fingerprint:
        from ..errors import InputError

        raise InputError("cannot carry a state between two different instances (fingerprints differ)")
    return dst.from_canonical(src.to_canonical(state))
