"""The gate table: ideal matrices and the axis each gate's over-rotation turns about.

One entry per gate name. Matrices are written from their textbook definitions in cirq's
conventions (tests/test_gates.py checks every one against cirq's gate library, the reference
simulator's own; cirq is not imported here because it takes seconds to import); the over-rotation generator K is the Hermitian operator with
ideal gate = exp(-i θ K) up to global phase, so an over-rotation δ is the extra unitary exp(-i δ K)
after the gate. Parametrised gates instead shift their first angle: U(θ+δ) U(θ)†.

Adding a gate is one entry here and one test (tests/test_gates.py).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

import numpy as np

from budget.pauli_algebra import I as _I, X as _X, Y as _Y, Z as _Z

_P1 = np.diag([0.0 + 0j, 1.0])  # |1><1|


def _u3(theta: float, phi: float, lam: float) -> np.ndarray:
    """OpenQASM U(θ, φ, λ) = Rz(φ) Ry(θ) Rz(λ) with the OpenQASM 3 global phase."""
    c, s = np.cos(theta / 2), np.sin(theta / 2)
    return np.array(
        [[c, -np.exp(1j * lam) * s], [np.exp(1j * phi) * s, np.exp(1j * (phi + lam)) * c]],
        dtype=complex,
    )


@dataclass(frozen=True)
class GateSpec:
    """One gate's entry in the table.

    Attributes:
        num_qubits: 1 or 2.
        num_params: number of angles (radians).
        matrix: function of the angles returning the ideal unitary (gate order, big-endian).
        rotation_generator: K for fixed gates (over-rotation = exp(-i δ K)); None when the gate
            has an angle (over-rotation shifts the first angle) or has no rotation axis.
        xy_plane: the gate is a rotation about an axis in the XY plane (``axis_error`` applies).
        virtual: takes no time on superconducting hardware (frame change), common practice.
    """

    num_qubits: int
    num_params: int
    matrix: Callable[..., np.ndarray]
    rotation_generator: np.ndarray | None = None
    xy_plane: bool = False
    virtual: bool = False


def _fixed(m: np.ndarray) -> Callable[..., np.ndarray]:
    m = np.asarray(m, dtype=complex)
    return lambda: m


def _rot(pauli: np.ndarray) -> Callable[[float], np.ndarray]:
    """R_P(θ) = exp(-i θ P/2) = cos(θ/2) I - i sin(θ/2) P for a Pauli matrix P."""
    return lambda t: np.cos(t / 2) * np.eye(len(pauli)) - 1j * np.sin(t / 2) * pauli


def _controlled(u: np.ndarray) -> np.ndarray:
    out = np.eye(4, dtype=complex)
    out[2:, 2:] = u
    return out


_SX = np.array([[1 + 1j, 1 - 1j], [1 - 1j, 1 + 1j]]) / 2
_ZZ = np.kron(_Z, _Z)

GATES: dict[str, GateSpec] = {
    "id": GateSpec(1, 0, _fixed(_I)),
    "x": GateSpec(1, 0, _fixed(_X), _X / 2, xy_plane=True),
    "y": GateSpec(1, 0, _fixed(_Y), _Y / 2, xy_plane=True),
    "z": GateSpec(1, 0, _fixed(_Z), _Z / 2, virtual=True),
    "h": GateSpec(1, 0, _fixed((_X + _Z) / np.sqrt(2)), (_X + _Z) / (2 * np.sqrt(2))),
    "s": GateSpec(1, 0, _fixed(np.diag([1, 1j])), _Z / 2, virtual=True),
    "sdg": GateSpec(1, 0, _fixed(np.diag([1, -1j])), -_Z / 2, virtual=True),
    "t": GateSpec(1, 0, _fixed(np.diag([1, np.exp(1j * np.pi / 4)])), _Z / 2, virtual=True),
    "tdg": GateSpec(1, 0, _fixed(np.diag([1, np.exp(-1j * np.pi / 4)])), -_Z / 2, virtual=True),
    "sx": GateSpec(1, 0, _fixed(_SX), _X / 2, xy_plane=True),
    "sxdg": GateSpec(1, 0, _fixed(_SX.conj().T), -_X / 2, xy_plane=True),
    "rx": GateSpec(1, 1, _rot(_X), xy_plane=True),
    "ry": GateSpec(1, 1, _rot(_Y), xy_plane=True),
    "rz": GateSpec(1, 1, _rot(_Z), virtual=True),
    "p": GateSpec(1, 1, lambda t: np.diag([1.0, np.exp(1j * t)]), virtual=True),
    "u1": GateSpec(1, 1, lambda t: np.diag([1.0, np.exp(1j * t)]), virtual=True),
    "u2": GateSpec(1, 2, lambda phi, lam: _u3(np.pi / 2, phi, lam)),
    "u3": GateSpec(1, 3, _u3),
    "u": GateSpec(1, 3, _u3),
    "cx": GateSpec(2, 0, _fixed(_controlled(_X)), np.kron(_P1, (_I - _X) / 2)),
    "cy": GateSpec(2, 0, _fixed(_controlled(_Y)), np.kron(_P1, (_I - _Y) / 2)),
    "cz": GateSpec(2, 0, _fixed(_controlled(_Z)), np.kron(_P1, _P1)),
    "swap": GateSpec(2, 0, _fixed(np.eye(4)[[0, 2, 1, 3]])),
    "iswap": GateSpec(2, 0, _fixed(np.array([[1, 0, 0, 0], [0, 0, 1j, 0], [0, 1j, 0, 0], [0, 0, 0, 1]]))),
    "cp": GateSpec(2, 1, lambda t: np.diag([1.0, 1.0, 1.0, np.exp(1j * t)])),
    "cu1": GateSpec(2, 1, lambda t: np.diag([1.0, 1.0, 1.0, np.exp(1j * t)])),
    "crz": GateSpec(2, 1, lambda t: _controlled(_rot(_Z)(t))),
    "rzz": GateSpec(2, 1, _rot(_ZZ)),
}
"""Gate name -> spec. Aliases accepted by readers are mapped in ALIASES."""

ALIASES = {"cnot": "cx", "phase": "p", "i": "id", "u0": "id", "cphase": "cp", "U": "u", "CX": "cx"}
"""Other names of table gates; ``U`` and ``CX`` are the OpenQASM built-ins."""


def spec(name: str) -> GateSpec:
    """The table entry for a gate name; KeyError names the gate if it is not in the table."""
    try:
        return GATES[ALIASES.get(name, name)]
    except KeyError:
        raise KeyError(f"gate {name!r} is not in the gate table") from None


@lru_cache(maxsize=4096)
def _cached(name: str, params: tuple[float, ...]) -> np.ndarray:
    s = spec(name)
    if len(params) != s.num_params:
        raise ValueError(f"gate {name} takes {s.num_params} angle(s), got {len(params)}")
    m = np.asarray(s.matrix(*params), dtype=complex)
    m.setflags(write=False)
    return m


def ideal_unitary(name: str, params: tuple[float, ...] = ()) -> np.ndarray:
    """The ideal unitary of a table gate (read-only array, cached).

    >>> ideal_unitary("cz").diagonal().real.tolist()
    [1.0, 1.0, 1.0, -1.0]
    """
    return _cached(name, tuple(float(p) for p in params))


_SWAP = np.array([[1, 0, 0, 0], [0, 0, 1, 0], [0, 1, 0, 0], [0, 0, 0, 1]], dtype=complex)


@lru_cache(maxsize=None)
def exchange_symmetric(name: str) -> bool:
    """True for a two-qubit gate unchanged when its qubits are exchanged, SWAP U SWAP = U, at any
    angles (checked at two generic angle sets) and with a symmetric over-rotation generator:
    cz, swap, iswap, rzz, cp, ... but not cx or cy.

    >>> exchange_symmetric("cz"), exchange_symmetric("cx")
    (True, False)
    """
    s = spec(name)
    if s.num_qubits != 2:
        return False
    mats = [np.asarray(s.matrix(*angles[: s.num_params]), dtype=complex) for angles in ((0.37, 1.21, -0.64), (2.03, -0.29, 0.88))]
    if s.rotation_generator is not None:
        mats.append(np.asarray(s.rotation_generator, dtype=complex))
    return all(np.allclose(_SWAP @ m @ _SWAP, m, atol=1e-12) for m in mats)


def overrotation_unitary(name: str, params: tuple[float, ...], delta_rad: float) -> np.ndarray:
    """The extra unitary an over-rotation δ adds after the gate.

    Fixed gates: exp(-i δ K) with K the table's rotation generator. Gates with angles: the first
    angle becomes θ+δ, so the error is U(θ+δ, ...) U(θ, ...)†. For rx this is Rx(δ); for u2(φ, λ),
    which is U(π/2, φ, λ), the π/2 becomes π/2+δ.

    Raises:
        ValueError: the gate has no rotation angle or axis (id, swap, iswap).
    """
    s = spec(name)
    if ALIASES.get(name, name) == "u2":  # u2(φ, λ) = U(π/2, φ, λ): its rotation angle is the π/2
        return _u3(np.pi / 2 + delta_rad, *params) @ ideal_unitary(name, params).conj().T
    if s.num_params:
        shifted = (params[0] + delta_rad,) + tuple(params[1:])
        return np.asarray(s.matrix(*shifted), dtype=complex) @ ideal_unitary(name, params).conj().T
    if s.rotation_generator is None:
        raise ValueError(f"over-rotation does not apply to gate {name!r} (it has no rotation angle)")
    w, v = np.linalg.eigh(s.rotation_generator)
    return (v * np.exp(-1j * delta_rad * w)) @ v.conj().T
