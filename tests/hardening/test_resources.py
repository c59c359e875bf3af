"""Absurd requests are refused up front, with the estimate, and never attempted.

"Up front" is checked by what the refusal costs: a few seconds at most (mostly
tracemalloc's own overhead) and a few megabytes of memory (tracemalloc sees
numpy's buffers too), where attempting
the work would take years or terabytes.  Each refusal must state its estimate,
and each estimate is checked against a fact it can be compared with.
"""

from __future__ import annotations

import re
import time
import tracemalloc

import pytest

from instgen.certify import certify
from instgen.errors import ConfigError, ResourceError
from instgen.graphs import build_graph, check_size, estimate_size
from instgen.make import make_instance
from instgen.samplers import Schedule, get_sampler
from instgen.scoring import check_effort, measure_many, measure_perturbed


def refused_up_front(fn, *args, **kwargs) -> str:
    """Run a request that must be refused; returns the message. Fails if it costs real time or memory."""
    tracemalloc.start()
    t0 = time.perf_counter()
    try:
        with pytest.raises((ResourceError, ConfigError)) as exc:
            fn(*args, **kwargs)
    finally:
        seconds = time.perf_counter() - t0
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    assert seconds < 5.0, f"took {seconds:.1f} s before refusing: it was attempted"
    assert peak < 64e6, f"allocated {peak / 1e6:.0f} MB before refusing: it was attempted"
    return str(exc.value)


@pytest.fixture(scope="module")
def k60():
    get_sampler("exact")  # imported here, so the timing below is the refusal's own
    return make_instance("complete:60", "pm1", seed=1)


def test_exact_enumeration_at_60_spins(k60):
    msg = refused_up_front(certify, k60, method="exact")
    assert "2^60" in msg and "years" in msg
    msg = refused_up_front(get_sampler("exact").run, k60, None, reads=1)
    assert "2^60" in msg and "years" in msg


def test_a_hundred_million_spin_graph():
    # Chimera C(M,N,T) has 2TMN nodes and T^2 MN + T(M-1)N + TM(N-1) edges (published formula,
    # e.g. Boothby, King, Roy 2016, "Fast clique minor generation in Chimera qubit connectivity graphs").
    M = 4000
    assert estimate_size(f"chimera:{M}") == (8 * M * M, 16 * M * M + 4 * (M - 1) * M * 2)
    for fn in (build_graph, check_size):
        msg = refused_up_front(fn, f"chimera:{M}")
        assert "128,000,000 nodes" in msg
    msg = refused_up_front(make_instance, f"chimera:{M}", "pm1", seed=1)
    assert "128,000,000 nodes" in msg


@pytest.mark.parametrize("spec", ["chimera:3", "chimera:2,3,2", "pegasus:3", "zephyr:2", "square:7x5",
                                  "square:6,periodic", "cubic:4", "kings:5", "triangular:5", "heavy-hex:2,3",
                                  "regular:20,3", "complete:9", "gnp:30,0.3"])
def test_size_estimates_never_undercount(spec):
    """The guard judges a graph by its estimate, so the estimate must not be below the real size."""
    n, m = estimate_size(spec)
    g = build_graph(spec)
    assert g.n <= n and g.m <= m, (spec, (g.n, g.m), (n, m))


def test_tree_decomposition_of_a_wide_graph():
    # The L x L grid has treewidth exactly L (a fact of graph theory, e.g. Bodlaender 1998,
    # "A partial k-arboretum of graphs with bounded treewidth"), so the 60 x 60 grid is far past
    # the solver's limit of width 25, and the same method proves a 6 x 6 grid.
    wide = make_instance("square:60", "pm1", seed=2)
    msg = refused_up_front(certify, wide, method="tree", time_limit=600)
    assert "width" in msg and "GB" in msg and re.search(r"width >= (\d+)", msg)
    assert int(re.search(r"width >= (\d+)", msg).group(1)) <= 60
    small = certify(make_instance("square:6", "pm1", seed=2), method="tree")
    assert small.status == "proven" and small.details["width"] <= 6


def test_absurd_reads_and_sweeps_when_scoring():
    inst = make_instance("chimera:2", "pm1", seed=3)
    msg = refused_up_front(measure_many, inst, ["tts"], ["sa"], sweeps=[10, 10**12], reads=10)
    assert "spin updates" in msg and ("days" in msg or "years" in msg)
    msg = refused_up_front(measure_many, inst, ["success"], ["sa"], sweeps=[100], reads=10**12)
    assert "GB" in msg
    msg = refused_up_front(measure_perturbed, inst, "success", 0.1, copies=10**9, sweeps=[10], reads=4)
    assert "copies" in msg


def test_the_effort_estimate_counts_what_samplers_report():
    """check_effort's arithmetic (reads x spins x sweeps) is the count the samplers report themselves."""
    inst = make_instance("chimera:1", "pm1", seed=4)
    for name in ("sa", "fast-sa"):
        batch = get_sampler(name).run(inst, Schedule(sweeps=13), reads=7, seed=1)
        assert batch.spin_updates == 7 * inst.n * 13
    with pytest.raises(ResourceError, match=re.escape(f"{7 * 10**9 * inst.n * 13:.3g} spin updates")):
        check_effort(inst.n, 7 * 10**9, [13])
    check_effort(inst.n, 7, [13])  # an ordinary request passes


def test_absurd_anneal_profile_and_planting():
    from instgen.planted import plant
    from instgen.report.profile import anneal_profile

    inst = make_instance("chimera:2", "pm1", seed=5)
    assert "spin updates" in refused_up_front(anneal_profile, inst, points=6, reads=10**12, sweeps=100)
    assert "GB" in refused_up_front(anneal_profile, inst, points=10**6, reads=1000, sweeps=10**6)
    assert "loops" in refused_up_front(plant, "chimera:2", "loops", seed=1, density=1e9)
    assert "GB" in refused_up_front(plant, "complete:100", "wishart", seed=1, alpha=1e5)


def test_an_absurd_preset_is_refused_before_breeding():
    from instgen.preset import validate

    msg = refused_up_front(validate, {"graph": {"spec": "zephyr:2000"}})
    assert "nodes" in msg and "[graph]" in msg
