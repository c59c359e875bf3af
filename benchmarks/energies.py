"""Energies of 10^4 states on a 2,048-spin instance: instgen against dimod, same run.

    python -m benchmarks.energies
"""

import time

import numpy as np

from benchmarks._machine import cpu_model
from instgen.make import make_instance


def best_cpu(fn, repeats=3):
    times = []
    for _ in range(repeats):
        t = time.process_time()
        fn()
        times.append(time.process_time() - t)
    return min(times)


def main():
    inst = make_instance("chimera:16", "pm1", seed=1)
    states = (2 * np.random.default_rng(0).integers(0, 2, size=(10_000, inst.n)) - 1).astype(np.int8)
    inst.energies(states[:2])  # load the compiled kernel
    bqm = inst.to_bqm()
    labels = list(inst.labels)
    ours = best_cpu(lambda: inst.energies(states))
    theirs = best_cpu(lambda: bqm.energies((states, labels)))
    same = np.array_equal(inst.energies(states), bqm.energies((states, labels)))
    print(f"{cpu_model()}; chimera:16 (2,048 spins, 6,016 couplings), 10,000 states, CPU seconds, best of 3")
    print(f"instgen  {ours:.3f} s")
    print(f"dimod    {theirs:.3f} s")
    print(f"ratio    {theirs / ours:.2f}x (dimod / instgen); identical energies: {same}")


if __name__ == "__main__":
    main()
