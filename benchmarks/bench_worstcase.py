"""The worst case over signs beyond exact enumeration: bound, search and time, side by side.

For positive semidefinite forms like the tool's (random low- and full-rank Gram matrices with
uneven scales), in one process:

- n <= 20: the meet-in-the-middle enumeration (the truth), the spectral bound with optimised
  diagonal shift, the multi-start local search and the triangle bound; ratios to the truth;
- n = 30, 50, 80: bound / best found (the truth lies between) and triangle / best found.

Run from the project root (single BLAS thread, as in the suite):

    OPENBLAS_NUM_THREADS=1 .venv/bin/python benchmarks/bench_worstcase.py [--cases 5]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from budget.analysis.worstcase import _enumerate, _local_search, spectral_bound


def _psd(rng: np.random.Generator, n: int, rank: int) -> np.ndarray:
    g = rng.normal(size=(n, rank)) * rng.uniform(0.1, 1.0, size=(n, 1))
    return g @ g.T


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=5, help="random matrices per size and rank")
    args = parser.parse_args()
    rng = np.random.default_rng(2026)
    print(f"{'n':>3} {'rank':>5} {'bound/max':>10} {'search/max':>11} {'triangle/max':>13} "
          f"{'t_enum ms':>10} {'t_bound ms':>11} {'t_search ms':>12}")
    for n in (12, 16, 20, 30, 50, 80):
        for rank in (2, 5, n):
            ratios = []
            for _ in range(args.cases):
                b = _psd(rng, n, rank)
                t0 = time.perf_counter()
                truth = _enumerate(b)[0] if n <= 20 else None
                t1 = time.perf_counter()
                bound = spectral_bound(b)
                t2 = time.perf_counter()
                found = _local_search(b)[0]
                t3 = time.perf_counter()
                ref = truth if truth is not None else found
                ratios.append((bound / ref, found / ref, np.sum(np.abs(b)) / ref, t1 - t0, t2 - t1, t3 - t2))
            r = np.array(ratios)
            worst = r[:, :3].max(axis=0)
            low = r[:, 1].min()
            times = 1e3 * r[:, 3:].mean(axis=0)
            enum = f"{times[0]:10.1f}" if n <= 20 else f"{'—':>10}"
            print(f"{n:>3} {rank:>5} {worst[0]:10.4f} {low:11.4f} {worst[2]:13.3f} {enum} {times[1]:11.1f} {times[2]:12.1f}")
    print("n > 20: ratios are to the best setting found (the true maximum lies between it and the bound)")


if __name__ == "__main__":
    main()
