"""Repeated non-Clifford blocks in the pauli engine: how far N goes in 60 s (never part of the tests).

1. The 100-qubit transverse-field Ising Trotter step (tests/pauli_cases.py, coherent and incoherent
   errors on every gate), process metric, default engine (threshold chosen and tightened within its
   60 s budget): wall time, truncation bound / result and rows held for growing N; the largest N
   whose run ends within 60 s is what docs/benchmarks.md states.
2. A 100-qubit block whose errors commute with it (the ZZ and Z parts of the step alone, Z-type
   errors): the early stop on convergence against walking every cycle (the same engine with the
   convergence test switched off in this process), side by side, with the ratio.

    .venv/bin/python benchmarks/bench_pauli_blocks.py            # both parts (a few minutes)
    .venv/bin/python benchmarks/bench_pauli_blocks.py --steps 10 20 30
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from budget.circuit.qasm import parse_qasm  # noqa: E402
from budget.engines.pauli import PauliEngine  # noqa: E402
from budget.engines.pauli import _sweep  # noqa: E402
from budget.errors.attach import attach  # noqa: E402
from budget.errors.model import ErrorModel  # noqa: E402
from pauli_cases import ising  # noqa: E402  (tests/pauli_cases.py)


def trotter(steps: list[int]) -> None:
    print("| N | wall s | bound / result | rows held | blocks |")
    print("|---|---|---|---|---|")
    for n in steps:
        c = ising(100, n)
        t0 = time.perf_counter()
        r = PauliEngine(qubit_map=False).run(c, "process")
        dt = time.perf_counter() - t0
        modes = ",".join(b["mode"] for b in r.details["repeated_blocks"])
        print(f"| {n} | {dt:.1f} | {r.details['truncation_bound'] / r.first_order:.2%} | {r.details['pauli_terms_max']:,} | {modes} |",
              flush=True)


def diagonal(n: int, count: int):
    body = " ".join(f"cx q[{i}], q[{i + 1}]; rz(0.4) q[{i + 1}]; cx q[{i}], q[{i + 1}];" for i in range(n - 1))
    body += " " + " ".join(f"rz(0.3) q[{i}];" for i in range(n))
    text = f'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[{n}] q;\nfor int s in [1:{count}] {{ {body} }}\n'
    gates = {"rz": {"z_phase": [0.001]}, "cx": {"cphase": 0.002}}
    return attach(parse_qasm(text), ErrorModel.from_dict({"gates": gates}))


def converging(counts: list[int]) -> None:
    print("| N | early stop s | cycles walked | every cycle s | ratio |")
    print("|---|---|---|---|---|")
    same = _sweep.same_step
    for count in counts:
        c = diagonal(100, count)
        t0 = time.perf_counter()
        r = PauliEngine(qubit_map=False).run(c, "process")
        fast = time.perf_counter() - t0
        walked = sum(b["cycles_walked"] for b in r.details["repeated_blocks"])
        _sweep.same_step = lambda a, b: False  # the same engine walking every cycle
        try:
            t0 = time.perf_counter()
            slow_r = PauliEngine(qubit_map=False).run(c, "process")
            slow = time.perf_counter() - t0
        finally:
            _sweep.same_step = same
        assert abs(slow_r.first_order - r.first_order) <= 1e-9 * r.first_order + 2 * r.details["truncation_bound"]
        print(f"| {count} | {fast:.2f} | {walked} | {slow:.2f} | {slow / fast:.0f}x |", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--steps", type=int, nargs="*", default=[10, 20, 30, 40])
    ap.add_argument("--counts", type=int, nargs="*", default=[10, 100, 1000])
    args = ap.parse_args()
    trotter(args.steps)
    converging(args.counts)


if __name__ == "__main__":
    main()
