"""The Wishart planted ensemble (Hamze et al., PRE 101, 052102 (2020)).

For N spins and M = round(alpha N) columns: draw a planted state t (±1), a
standard Gaussian N x M matrix Z, project its columns orthogonally to t with
P = I - t t^T / N, and set W = P Z.  The paper writes H = -sum J'_ij s_i s_j
with J' = -W W^T / N; in instgen's convention (E = +sum J_ij s_i s_j) that is

    J_ij = (W W^T)_ij / N     for i < j.

Then E(s) = (|W^T s|^2 - tr W W^T) / (2N) >= -tr(W W^T) / (2N), and W^T t = 0,
so t is a ground state with E0 = -tr(W W^T) / (2N).  Small alpha gives easy,
highly degenerate problems, alpha near 1 the hardest, large alpha easy again
(the paper's easy-hard-easy profile).

The proof is checked without W: with d_i = -t_i (J t)_i and Q = J + diag(d),
t is a ground state whenever Q is positive semidefinite and Q t = 0, because
E(s) - E(t) = s^T Q s / 2 for every state s.  Rounding leaves a slack of order
1e-12 relative to the couplings, reported in the certificate.

Discretisation: ``disorder="binary"`` draws Z from ±1 instead of the Gaussian.
The same proof holds (W W^T is still positive semidefinite with t in its
kernel); the couplings then take values on a grid of spacing 1/N^3.  Rounding J
itself to a coarse grid would break the proof, so it is not offered.
``coupling_range`` rescales J so that max |J| equals it (a positive factor keeps
the proof).
"""

from __future__ import annotations

import numpy as np

from ..errors import CertificationError, InputError, ResourceError
from ..seeds import as_generator
from . import PlantedFamily, construction_of

DISORDERS = ("gaussian", "binary")


def _dense(instance_or_topo):
    n, e = instance_or_topo.n, np.asarray(instance_or_topo.edges)
    if len(e) != n * (n - 1) // 2:
        raise InputError(f"the Wishart ensemble needs a complete graph (e.g. complete:{n}); "
                         f"this one has {len(e)} of {n * (n - 1) // 2} possible edges")
    return e


#: Memory the disorder matrices may take (refused up front beyond it).
MAX_BYTES = 4e9


def plant_wishart(graph, alpha: float = 0.5, seed=None, *, disorder: str = "gaussian",
                  coupling_range: float | None = None):
    """A Wishart planted instance on a complete graph.

    Parameters
    ----------
    graph : str or Topology
        A complete graph, e.g. ``"complete:64"``.
    alpha : float
        M / N, the number of Gaussian columns per spin (> 0).
    seed : int, optional
    disorder : {"gaussian", "binary"}
        Entries of Z: standard normal, or ±1.
    coupling_range : float, optional
        Rescale so that max |J| equals this value.

    Examples
    --------
    >>> inst = plant_wishart("complete:12", alpha=0.5, seed=1)
    >>> bool(np.isclose(inst.energy(inst.planted), inst.metadata["construction"]["planted_energy"]))
    True
    """
    from ..instance import Instance
    from ..make import topology

    if not (isinstance(alpha, (int, float)) and np.isfinite(alpha) and alpha > 0):
        raise InputError(f"alpha must be a positive number (columns per spin), got {alpha!r}")
    if disorder not in DISORDERS:
        raise InputError(f"unknown Wishart disorder {disorder!r}; choose one of: {', '.join(DISORDERS)}")
    if coupling_range is not None and not (np.isfinite(coupling_range) and coupling_range > 0):
        raise InputError(f"coupling_range must be a positive number, got {coupling_range!r}")
    topo = topology(graph)
    edges = _dense(topo)
    N = topo.n
    if N < 3:
        raise InputError("the Wishart ensemble needs at least 3 spins")
    need = 3 * 8.0 * N * alpha * N  # Z, W and their product's temporaries, float64
    if need > MAX_BYTES:
        raise ResourceError(f"alpha {alpha:g} on {N:,} spins means a disorder matrix of {N:,} x {alpha * N:.3g}, "
                            f"about {need / 1e9:.3g} GB; instgen refuses above {MAX_BYTES / 1e9:g} GB")
    M = max(1, int(round(alpha * N)))
    rng = as_generator(seed)
    t = (2 * rng.integers(0, 2, size=N) - 1).astype(np.int8)
    Z = rng.standard_normal((N, M)) if disorder == "gaussian" else (2.0 * rng.integers(0, 2, size=(N, M)) - 1)
    tf = t.astype(np.float64)
    W = Z - np.outer(tf, tf @ Z) / N
    C = W @ W.T / N
    J = C[edges[:, 0], edges[:, 1]]
    energy = -float(np.trace(C)) / 2
    factor = 1.0
    if coupling_range is not None:
        factor = coupling_range / float(np.abs(J).max())
        J = J * factor
        energy *= factor
    con = {"family": "wishart", "alpha": float(alpha), "columns": M, "disorder": disorder,
           "coupling_range": coupling_range, "scale_factor": factor, "planted_energy": energy,
           "seed": int(seed) if isinstance(seed, (int, np.integer)) else None}
    return Instance(edges=topo.edges, J=J, n=N, labels=topo.labels, graph=topo.spec, planted=t,
                    metadata={"kind": "planted", "construction": con})


def psd_proof(instance) -> dict:
    """Check that the planted state t is a ground state through Q = J + diag(d) >= 0.

    Works for any instance without fields: d_i = -t_i (J t)_i makes Q t = 0,
    and then E(s) - E(t) = s^T Q s / 2, which is >= 0 for all s when Q is
    positive semidefinite.  Returns the smallest eigenvalue and the slack.
    """
    if instance.has_fields:
        raise CertificationError("the semidefinite proof needs an instance without fields")
    n = instance.n
    if n > 6000:
        raise CertificationError(f"the semidefinite check on {n} spins needs a dense {n} x {n} matrix; too large")
    t = instance.planted.astype(np.float64)
    Q = np.zeros((n, n))
    e = instance.edges
    Q[e[:, 0], e[:, 1]] = instance.J
    Q = Q + Q.T
    d = -t * (Q @ t)
    Q[np.diag_indices(n)] = d
    lam = float(np.linalg.eigvalsh(Q)[0])
    scale = max(instance.scale, 1e-300)
    # E(s) - E(t) = (s^T Q s - t^T Q t) / 2 >= (n * min(lam, 0) - |t^T Q t|) / 2
    slack = (n * max(-lam, 0.0) + abs(float(t @ Q @ t))) / 2
    if lam < -1e-9 * scale * n:
        raise CertificationError(f"Q = J + diag(d) has a negative eigenvalue {lam:.3g}: "
                                 "the planted state is not proven to be a ground state")
    return {"min_eigenvalue": lam, "slack": slack}


def verify(instance) -> dict:
    """Check a Wishart instance's proof (see the module docstring)."""
    con = construction_of(instance, "wishart")
    _dense(instance)
    details = psd_proof(instance)
    energy = instance.energy(instance.planted)
    stated = float(con.get("planted_energy", np.nan))
    if not abs(energy - stated) <= 1e-9 * max(1.0, abs(stated)):
        raise CertificationError(f"the planted state's energy {energy:.12g} differs from the construction's "
                                 f"{stated:.12g}")
    return {
        "family": "wishart", "alpha": con.get("alpha"), "bound": stated, **details,
        "proof": ("with d_i = -t_i (J t)_i, Q = J + diag(d) is positive semidefinite and Q t = 0, so "
                  "E(s) - E(t) = s^T Q s / 2 >= 0 for every state s (up to the stated rounding slack)"),
    }


def rules(instance):
    """The coupling rules of a Wishart construction: Gaussian couplings of the ensemble's spread.

    An off-diagonal J_ij = (1/N) sum over M columns of products of unit-variance entries has
    standard deviation sqrt(M) / N (times the rescaling factor); the range is the rescaled
    maximum, when one was asked for.
    """
    from ..couplings import CouplingRules

    construction = instance.metadata["construction"]
    sigma = float(np.sqrt(construction["columns"])) / instance.n * construction.get("scale_factor", 1.0)
    return CouplingRules.make(f"gaussian:{sigma!r}", "none", coupling_range=construction.get("coupling_range"))


FAMILY = PlantedFamily("wishart", plant_wishart, verify,
                       "Wishart planted ensemble on complete graphs; alpha = M/N (Hamze et al. 2020)", rules)
