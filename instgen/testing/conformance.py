"""A conformance kit every surrogate sampler must pass.

:func:`check_sampler` runs a sampler (by registered name, or an instance of a
:class:`~instgen.samplers.Sampler` subclass) over a few small instances and
checks, raising AssertionError with a plain message on the first failure:

* the batch is well formed: (reads, n) int8 states of ±1, float64 energies,
  an int seed below 2**31, a JSON-friendly schedule, the sampler's name;
* every energy equals :meth:`Instance.energies` of the returned state;
* with a long schedule the lowest energy equals the minimum from dimod's
  ExactSolver (an independent brute force), on instances with and without
  fields and with integer and real couplings;
* the same seed gives the same batch;
* labels play no part: the same couplings under other labels give the same batch;
* an unknown option is refused with :class:`~instgen.errors.InputError`.

Use it from pytest::

    def test_my_sampler():
        check_sampler("fast-sa")
"""

from __future__ import annotations

import json

import numpy as np

from ..errors import InputError
from ..instance import Instance
from ..make import make_instance
from ..samplers import SAMPLERS, Sampler, Schedule, default_beta_range
from ..seeds import SEED_LIMIT


def small_instances(integers_only: bool = False) -> list[Instance]:
    """Small test instances (3 to 10 spins), each carrying its coupling rules.

    A frustrated triangle with a field, Chimera cells with ±1 couplings and
    fields, a Gaussian spin glass with Gaussian fields on a random graph, and
    a 3x3 grid with integer couplings up to 3.  With ``integers_only`` (for
    samplers that take whole-number couplings only) the triangle's field is 1
    and the Gaussian glass is replaced by Chimera cells with couplings up to 2.
    """
    import networkx as nx

    if integers_only:
        tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0], h=[1.0, 0.0, 0.0],
                       metadata={"rules": {"couplings": "pm1", "fields": "pm1"}})
        return [tri, make_instance("chimera:1", "pm1", "pm1", seed=2),
                make_instance("chimera:1", "int:2", "pm1", seed=6), make_instance("square:3", "int:3", "none", seed=4)]

    tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0], h=[0.5, 0.0, 0.0],
                   metadata={"rules": {"couplings": "pm1", "fields": "levels:0.5"}})
    g = nx.gnp_random_graph(10, 0.45, seed=11)
    rng = np.random.default_rng(11)
    edges = np.array(sorted(g.edges()), dtype=np.int32)
    glass = Instance(edges=edges, J=rng.normal(size=len(edges)), h=rng.normal(scale=0.5, size=10),
                     metadata={"rules": {"couplings": "gaussian", "fields": "gaussian:0.5"}})
    return [
        tri,
        make_instance("chimera:1", "pm1", "pm1", seed=2),
        glass,
        make_instance("square:3", "int:3", "none", seed=4),
    ]


def _scale(inst: Instance) -> float:
    from ..couplings import CouplingRules

    return CouplingRules.from_dict(inst.metadata["rules"]).scale


def _exact_minimum(inst: Instance) -> float:
    import dimod

    return float(dimod.ExactSolver().sample(inst.to_bqm()).first.energy)


def _check_batch(who: str, inst: Instance, batch, reads: int) -> None:
    s = batch.states
    assert isinstance(s, np.ndarray) and s.dtype == np.int8, f"{who}: states must be an int8 array"
    assert s.ndim == 2 and s.shape[1] == inst.n, f"{who}: states have shape {s.shape}, expected (R, {inst.n})"
    assert 1 <= s.shape[0] <= reads, f"{who}: {s.shape[0]} states returned for {reads} reads"
    assert np.all(np.abs(s) == 1), f"{who}: states must hold only -1 and +1"
    assert batch.energies.dtype == np.float64 and batch.energies.shape == (s.shape[0],), \
        f"{who}: energies must be float64 of shape ({s.shape[0]},)"
    assert np.allclose(batch.energies, inst.energies(s), rtol=0, atol=1e-9), \
        f"{who}: reported energies differ from Instance.energies of the returned states"
    assert isinstance(batch.seed, int) and 0 <= batch.seed < SEED_LIMIT, f"{who}: seed {batch.seed} not below 2**31"
    assert isinstance(batch.spin_updates, int) and batch.spin_updates >= 0, f"{who}: spin_updates must be an int >= 0"
    try:
        json.dumps(batch.to_dict(), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise AssertionError(f"{who}: the batch does not turn into plain JSON: {exc}") from None


def _same(a, b) -> bool:
    return np.array_equal(a.states, b.states) and np.array_equal(a.energies, b.energies)


def check_sampler(sampler: str | Sampler, *, sweeps: int = 1000, reads: int = 16, seed: int = 7,
                  instances=None, options: dict | None = None) -> None:
    """Run the conformance checks (see the module docstring) on one sampler.

    Parameters
    ----------
    sampler : str or Sampler
        A registered name (``"sa"``) or a sampler object.
    sweeps : int
        Length of the long schedule used for the ground-state check.
    reads : int
    seed : int
    instances : list of Instance, optional
        Defaults to :func:`small_instances`; each needs ``metadata["rules"]``.
        A sampler limited to whole-number couplings passes
        ``small_instances(integers_only=True)``.
    options : dict, optional
        Sampler options used in every run.

    Raises
    ------
    AssertionError
        On the first check that fails, saying which and on what instance.
    """
    s = SAMPLERS.get(sampler)() if isinstance(sampler, str) else sampler
    assert isinstance(s, Sampler), f"{sampler!r} is not a Sampler"
    opts = dict(options or {})
    instances = list(instances or small_instances())
    for k, inst in enumerate(instances):
        who = f"sampler {s.name!r} on test instance {k} ({inst!r})"
        long = Schedule(sweeps=sweeps, beta_range=default_beta_range(_scale(inst)))
        short = Schedule(sweeps=max(2, sweeps // 10), beta_range=long.beta_range)
        batch = s.run(inst, long, reads=reads, seed=seed, **opts)
        assert batch.sampler == s.name, f"{who}: batch names sampler {batch.sampler!r}"
        _check_batch(who, inst, batch, reads)
        exact = _exact_minimum(inst)
        assert abs(batch.min_energy - exact) <= 1e-9, \
            f"{who}: lowest energy {batch.min_energy} after {sweeps} sweeps, dimod ExactSolver says {exact}"
        again = s.run(inst, short, reads=reads, seed=seed, **opts)
        assert _same(again, s.run(inst, short, reads=reads, seed=seed, **opts)), f"{who}: same seed, different batch"
        order = np.random.default_rng(k).permutation(inst.n)
        relabelled = inst.replace(labels=[f"q{order[i]}" for i in range(inst.n)])
        assert _same(again, s.run(relabelled, short, reads=reads, seed=seed, **opts)), \
            f"{who}: the same couplings under other labels gave a different batch"
    inst = instances[0]
    try:
        s.run(inst, Schedule(sweeps=10), reads=2, seed=seed, no_such_option_xyz=1)
    except InputError:
        pass
    else:
        raise AssertionError(f"sampler {s.name!r} accepted an unknown option instead of refusing it")

