"""Test circuits for the pauli engine: a 1D transverse-field Ising Trotter loop as OpenQASM 3.

One step: exp(-i (zz/2) Z_i Z_{i+1}) as cx-rz(zz)-cx on every bond (even bonds, then odd), then
rx(x) on every qubit; the steps are a ``for`` loop, kept folded by the reader. The error model is an
invented lab's (common practice for orders of magnitude, no source).
"""

from __future__ import annotations

from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyCircuit


def ising_qasm(n: int, steps: int, *, zz: float = 0.4, x: float = 0.6) -> str:
    lines = ["OPENQASM 3.0;", 'include "stdgates.inc";', f"qubit[{n}] q;", f"for int s in [1:{steps}] {{"]
    for start in (0, 1):
        lines += [f"  cx q[{i}], q[{i + 1}]; rz({zz}) q[{i + 1}]; cx q[{i}], q[{i + 1}];" for i in range(start, n - 1, 2)]
    lines += [f"  rx({x}) q[{i}];" for i in range(n)]
    return "\n".join(lines + ["}"])


def ising_model(*, incoherent: bool = True, scale: float = 1.0) -> dict:
    gates = {
        "cx": {"duration_ns": 200.0, "overrotation": 0.004 * scale},
        "rx": {"duration_ns": 30.0, "overrotation": 0.002 * scale},
        "rz": {"z_phase": [0.001 * scale]},
    }
    model: dict = {"gates": gates}
    if incoherent:
        gates["cx"]["avg_infidelity"] = 2e-5
        gates["rx"]["avg_infidelity"] = 2e-6
        model["qubits"] = {"t1_us": 2000.0, "t2_us": 1500.0}
    return model


def ising(n: int, steps: int, **kw) -> NoisyCircuit:
    model = {k: kw.pop(k) for k in ("incoherent", "scale") if k in kw}
    return attach(parse_qasm(ising_qasm(n, steps, **kw)), ErrorModel.from_dict(ising_model(**model)))
