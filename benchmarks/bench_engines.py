"""Engines side by side against cirq's density-matrix simulator, and cost versus repeat count.

Run: ``python benchmarks/bench_engines.py`` (``--quick``: 8 qubits only). Not part of the tests.

1. Speed and agreement: n qubits, CYCLES cycles of (sx on every qubit; CZ brickwork on even, then
   odd neighbour pairs), amplitude and phase damping after every gate and on idle qubits, state
   metric for input |0…0>. Every engine of budget.engines.ENGINE_NAMES that imports and fits runs on
   the NoisyCircuit; cirq.DensityMatrixSimulator runs the same channels written directly as cirq
   operations (gates, cirq.amplitude_damp, cirq.phase_damp). Reports seconds, speed-up and
   |difference|. Targets: exact >= 10x faster than cirq at 10 qubits, agreement 1e-8.
2. Cost versus N: a small noisy block repeated N = 1 and N = 10^6 times (plus 10^9), per engine and
   metric. Target: time(N = 10^6) / time(N = 1) <= 2.
3. Process metric with incoherent errors: the superoperator against the Choi state of the doubled
   system (same numbers held, timed side by side).
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time

if __name__ == "__main__":  # BLAS threads must be fixed before numpy loads
    _threads = sys.argv[sys.argv.index("--threads") + 1] if "--threads" in sys.argv else "1"
    os.environ["OPENBLAS_NUM_THREADS"] = os.environ["OMP_NUM_THREADS"] = _threads

import cirq
import numpy as np
import scipy.linalg

from budget.circuit.ir import Operation
from budget.engines import ENGINE_NAMES, get_engine
from budget.engines.exact.engine import ExactEngine
from budget.pauli_algebra import pauli_matrix
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat, Relaxation

CYCLES = 50
T1_NS, T2_NS = 60_000.0, 45_000.0  # invented device: T1 = 60 µs, T2 = 45 µs
SX_NS, CZ_NS = 30.0, 50.0


def _relax(q: int, t_ns: float) -> Relaxation:
    tphi_inv = 1 / T2_NS - 1 / (2 * T1_NS)
    return Relaxation(q, t_ns, float(1 - np.exp(-t_ns / T1_NS)), float(np.exp(-t_ns * tphi_inv)))


def _noisy(gate: str, qubits: tuple[int, ...], t_ns: float, h: dict[str, float] | None = None) -> NoisyOperation:
    h = h or {}
    k = len(qubits)
    herm = sum((c * pauli_matrix(p) for p, c in h.items()), np.zeros((2**k, 2**k), complex))
    return NoisyOperation(
        op=Operation(gate, qubits),
        family=gate,
        coherent=scipy.linalg.expm(-1j * herm),
        hamiltonian=dict(h),
        relaxation=tuple(_relax(q, t_ns) for q in qubits),
        duration_ns=t_ns,
    )


def _pairs(n: int, parity: int) -> list[tuple[int, int]]:
    return [(q, q + 1) for q in range(parity, n - 1, 2)]


def brickwork_layers(n: int, parity: int) -> tuple[NoisyLayer, NoisyLayer]:
    """One cycle: sx on every qubit, then CZ on neighbour pairs starting at ``parity``."""
    sx = NoisyLayer(tuple(_noisy("sx", (q,), SX_NS) for q in range(n)), (), SX_NS)
    pairs = _pairs(n, parity)
    busy = {q for p in pairs for q in p}
    idle = tuple(_relax(q, CZ_NS) for q in range(n) if q not in busy)
    cz = NoisyLayer(tuple(_noisy("cz", p, CZ_NS) for p in pairs), idle, CZ_NS)
    return sx, cz


def brickwork(n: int, cycles: int = CYCLES) -> NoisyCircuit:
    body = [layer for c in range(cycles) for layer in brickwork_layers(n, c % 2)]
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), tuple(body))


def cirq_brickwork(n: int, cycles: int = CYCLES) -> tuple[cirq.Circuit, cirq.Circuit]:
    """(ideal, noisy) cirq circuits of :func:`brickwork`, channels written out directly."""
    qs = cirq.LineQubit.range(n)
    ideal, noisy = [], []

    def damp(q: int, t_ns: float) -> list:
        r = _relax(q, t_ns)
        return [cirq.amplitude_damp(r.gamma).on(qs[q]), cirq.phase_damp(1 - r.dephasing_factor**2).on(qs[q])]

    for c in range(cycles):
        moment = [cirq.XPowGate(exponent=0.5).on(q) for q in qs]
        ideal += moment
        noisy += moment + [ch for q in range(n) for ch in damp(q, SX_NS)]
        pairs = _pairs(n, c % 2)
        busy = {q for p in pairs for q in p}
        moment = [cirq.CZ(qs[a], qs[b]) for a, b in pairs]
        ideal += moment
        noisy += moment + [ch for q in range(n) for ch in damp(q, CZ_NS)]
    return cirq.Circuit([cirq.I(q) for q in qs] + ideal), cirq.Circuit([cirq.I(q) for q in qs] + noisy)


def cirq_state_infidelity(n: int, cycles: int = CYCLES) -> tuple[float, float]:
    """(1 - <ψ|ρ|ψ>, seconds spent in cirq.DensityMatrixSimulator)."""
    ideal, noisy = cirq_brickwork(n, cycles)
    qs = cirq.LineQubit.range(n)
    psi = cirq.Simulator(dtype=np.complex128).simulate(ideal, qubit_order=qs).final_state_vector
    t0 = time.perf_counter()
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(noisy, qubit_order=qs).final_density_matrix
    seconds = time.perf_counter() - t0
    return float(1 - np.real(psi.conj() @ rho @ psi)), seconds


def engines():
    for name in ENGINE_NAMES:
        try:
            yield name, get_engine(name)
        except Exception as exc:  # an engine not written yet
            print(f"  ({name}: not available: {type(exc).__name__}: {exc})")


def _timed(engine, circuit, metric):
    """(result or None, seconds); an engine that fails is reported, not fatal."""
    t0 = time.perf_counter()
    try:
        result = engine.run(circuit, metric)
    except Exception as exc:
        print(f"  ({engine.name}: failed: {type(exc).__name__}: {exc})")
        result = None
    return result, time.perf_counter() - t0


def speed(sizes: list[int]) -> None:
    print(f"== speed: {CYCLES} cycles of sx + CZ brickwork, amplitude and phase damping, state metric")
    for n in sizes:
        ref, t_cirq = cirq_state_infidelity(n)
        print(f"n = {n}: cirq.DensityMatrixSimulator {t_cirq:8.2f} s  infidelity {ref:.12f}")
        circuit = brickwork(n)
        for name, engine in engines():
            reason = engine.fits(circuit, "state")
            if reason:
                print(f"  {name:10s} does not fit: {reason}")
                continue
            result, t = _timed(engine, circuit, "state")
            if result is None:
                continue
            diff = abs(result.infidelity - ref)
            print(
                f"  {name:10s} {t:8.3f} s  speed-up {t_cirq / t:7.1f}x  infidelity {result.infidelity:.12f}"
                f"  |diff| {diff:.1e}"
            )


def repeated(n: int, count: int) -> NoisyCircuit:
    """A 4-layer noisy block (sx, CZ even, rx with an over-rotation, CZ odd) repeated ``count`` times."""
    sx, cz0 = brickwork_layers(n, 0)
    _, cz1 = brickwork_layers(n, 1)
    rx = NoisyLayer(tuple(_noisy("sx", (q,), SX_NS, {"X": 1e-3, "Z": 4e-4}) for q in range(n)), (), SX_NS)
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), (NoisyRepeat((sx, cz0, rx, cz1), count),))


def cost_versus_count(n: int) -> None:
    """Time per engine and metric for N = 1, 10^6, 10^9 repetitions of the same block. The exact
    engine unrolls N = 1 (cheaper than building the block matrix), so it also runs with
    repeats="power", which takes the block-power path for every N."""
    print(f"== cost versus repeat count: 4-layer noisy block on {n} qubits")
    variants = list(engines()) + [("exact[power]", ExactEngine(repeats="power"))]
    for name, engine in variants:
        for metric in ("state", "process"):
            times = {}
            for count in (1, 10**6, 10**9):
                circuit = repeated(n, count)
                reason = engine.fits(circuit, metric)
                if reason:
                    print(f"  {name:12s} {metric:7s} N = {count:>10}: does not fit: {reason}")
                    continue
                result, t = _timed(engine, circuit, metric)
                if result is None:
                    continue
                times[count] = t
                print(
                    f"  {name:12s} {metric:7s} N = {count:>10}: {t:7.3f} s  infidelity {result.infidelity:.10f}"
                )
            if 1 in times and 10**6 in times:
                ratio = times[10**6] / times[1]
                verdict = "pass" if ratio <= 2 else "FAIL"
                print(f"  {name:12s} {metric:7s} ratio N=10^6 / N=1: {ratio:.2f} ({verdict}, target <= 2)")


def choi_versus_superoperator(n: int, cycles: int = 10) -> None:
    """Process metric with incoherent errors, two ways with the same 16^n numbers: the exact
    engine's superoperator, and the Choi state (2n-qubit density matrix: ancillas entangled with
    the system by noise-free h and cx, then the noisy circuit on the system) through the exact
    engine's state metric. 1 - <Φ_U|ρ_Choi|Φ_U> = 1 - F_pro (Nielsen, Phys. Lett. A 303 (2002))."""
    circuit = brickwork(n, cycles)
    anc = range(n, 2 * n)

    def clean(gate: str, qubits: tuple[int, ...]) -> NoisyOperation:
        k = len(qubits)
        return NoisyOperation(Operation(gate, qubits), gate, np.eye(2**k, dtype=complex), {})

    prep = (
        NoisyLayer(tuple(clean("h", (a,)) for a in anc), (), 0.0),
        NoisyLayer(tuple(clean("cx", (a, a - n)) for a in anc), (), 0.0),
    )
    doubled = NoisyCircuit(tuple(f"q[{i}]" for i in range(2 * n)), prep + circuit.body)
    engine = ExactEngine()
    print(f"== process metric, {n} qubits, {cycles} noisy cycles: superoperator versus Choi state")
    sup, t_sup = _timed(engine, circuit, "process")
    choi, t_choi = _timed(engine, doubled, "state")
    if sup is not None and choi is not None:
        print(f"  superoperator {t_sup:7.3f} s  infidelity {sup.infidelity:.12f}")
        print(f"  Choi state    {t_choi:7.3f} s  infidelity {choi.infidelity:.12f}  |diff| {abs(sup.infidelity - choi.infidelity):.1e}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="8 qubits only (skips the 10-qubit cirq run)")
    parser.add_argument(
        "--threads", default="1", help="BLAS threads for every engine and cirq alike (default 1, see docs/benchmarks.md)"
    )
    args = parser.parse_args()
    print(
        f"machine: {platform.machine()}, {os.cpu_count()} cores, python {platform.python_version()}, "
        f"numpy {np.__version__}, cirq {cirq.__version__}, BLAS threads {os.environ.get('OPENBLAS_NUM_THREADS')}, "
        f"load average {os.getloadavg()[0]:.1f}"
    )
    speed([8] if args.quick else [8, 10])
    cost_versus_count(4)
    choi_versus_superoperator(3 if args.quick else 5)


if __name__ == "__main__":
    main()
