"""Cost of the orders beyond the first in the clifford or pauli engine, side by side in one process.

For each circuit the engine (``--engine clifford``, the default, or ``pauli``) runs two ways, alternated ``--repeats`` times: first order
only (``second_order=False``), and the default (second order, plus every order of the coherent
part where the error's components touch at most 8 qubits, budget/engines/clifford/allorders.py),
and prints the median seconds, the ratio default / first order, the value and which order the
engine reached. Circuits:

- ``xy4-200``: x, y, x, y on 200 independent qubits (over-rotation 1e-3 per gate), N = 300:
  first order 0, every order on 200 one-qubit components.
- ``orbit-6``: x/y/x/y on 6 qubits then a scrambling Clifford of period 102, N = 10^6: folded by
  orbits, second order within each repetition.
- ``scramble-200``: 20 random single-qubit Clifford layers with Z errors and CZ brickworks with ZZ
  errors on 200 qubits: the all-orders pass stops within its first layers (support).
- ``ising-20`` (pauli only): the 20-qubit, 4-step Ising Trotter loop of tests/pauli_cases.py
  (non-Clifford), with two observables: every order is out of reach (support).

The pauli engine's all-orders pass (budget/engines/pauli/_allorders.py) follows light cones; its
``orbit-6`` case executes more layers than the engine walks, so it is left out there.

    .venv/bin/python benchmarks/bench_orders.py [--repeats 3] [--engine pauli]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from echo_reference import op, xy4_cycle  # noqa: E402
from pauli_cases import ising  # noqa: E402

from budget.engines.clifford.engine import CliffordEngine  # noqa: E402
from budget.engines.pauli.engine import PauliEngine  # noqa: E402
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyRepeat  # noqa: E402


def _names(n: int) -> tuple[str, ...]:
    return tuple(f"q[{i}]" for i in range(n))


def xy4_200() -> NoisyCircuit:
    n = 200
    cyc = tuple(NoisyLayer(tuple(op(g, (q,), {a: 1e-3}) for q in range(n)), (), 0.0) for g, a in (("x", "X"), ("y", "Y"), ("x", "X"), ("y", "Y")))
    return NoisyCircuit(_names(n), (NoisyRepeat(cyc, 300),))


def orbit_6() -> NoisyCircuit:
    n = 6
    scramble = [NoisyLayer((op("h", (0,), {}),) + tuple(op("s", (q,), {}) for q in range(1, n)), (), 0.0)]
    scramble += [NoisyLayer((op("cx", (q, q + 1), {}),), (), 0.0) for q in range(n - 1)]
    cyc = tuple(xy4_cycle(np.random.default_rng(5), n, 1e-4)) + tuple(scramble)
    return NoisyCircuit(_names(n), (NoisyRepeat(cyc, 10**6),))


def scramble_200() -> NoisyCircuit:
    rng = np.random.default_rng(1)
    n = 200
    body = []
    for k in range(20):
        body.append(NoisyLayer(tuple(op(str(rng.choice(["h", "s", "sx"])), (q,), {"Z": float(rng.normal(0, 1e-3))}) for q in range(n)), (), 0.0))
        body.append(NoisyLayer(tuple(op("cz", (q, q + 1), {"ZZ": 1e-3}) for q in range(k % 2, n - 1, 2)), (), 0.0))
    return NoisyCircuit(_names(n), tuple(body))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--engine", choices=("clifford", "pauli"), default="clifford")
    args = parser.parse_args()
    if args.engine == "clifford":
        engines = {"first": CliffordEngine(qubit_map=False, second_order=False), "default": CliffordEngine(qubit_map=False)}
        cases = (("xy4-200", xy4_200), ("orbit-6", orbit_6), ("scramble-200", scramble_200))
    else:
        engines = {"first": PauliEngine(second_order=False), "default": PauliEngine()}
        cases = (("xy4-200", xy4_200), ("scramble-200", scramble_200), ("ising-20", lambda: ising(20, 4)))
    for name, build in cases:
        circuit = build()
        observables = ("Z0", "X5Z6") if name == "ising-20" else ()
        times: dict[str, list[float]] = {k: [] for k in engines}
        results = {}
        for _ in range(args.repeats):
            for key, engine in engines.items():
                t = time.perf_counter()
                results[key] = engine.run(circuit, "process", observables=observables)
                times[key].append(time.perf_counter() - t)
        med = {k: statistics.median(v) for k, v in times.items()}
        d = results["default"].details
        reached = d.get("coherent_order") or d.get("second_order") or "second"
        print(
            f"{name:13s} first {med['first']:.3f} s  default {med['default']:.3f} s  ratio {med['default'] / med['first']:.2f}  "
            f"value first {results['first'].infidelity:.4g} default {results['default'].infidelity:.4g}  ({reached})"
        )


if __name__ == "__main__":
    main()
