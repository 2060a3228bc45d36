"""Unit and error-measure conversions for imported calibration data (docs/import.md).

Times: s, ms, µs (us), ns. Angles: rad, mrad, deg. Probabilities: plain or %.

Error measures, d = 2^n for an n-qubit gate:

- *Pauli error* (the process infidelity e_F = 1 - F_pro of a Pauli channel, what cross-entropy
  benchmarking and simultaneous RB report "per cycle") to *average gate infidelity*
  r = d/(d+1) · e_F (Nielsen, "A simple formula for the average gate fidelity of a quantum
  dynamical operation", Phys. Lett. A 303, 249 (2002)).
- *Error per Clifford* r_C to error per physical gate, for g physical gates per Clifford on
  average: under depolarizing composition the depolarizing parameter multiplies,
  p = 1 - d r/(d-1) (Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)), so p_gate = p_C^(1/g) and
  r_gate = (d-1)/d · (1 - p_C^(1/g)) ≈ r_C / g for small errors.
"""

from __future__ import annotations

import math

TIME_NS: dict[str, float] = {"s": 1e9, "ms": 1e6, "us": 1e3, "µs": 1e3, "μs": 1e3, "ns": 1.0}
"""Unit name -> nanoseconds (both the micro sign U+00B5 and the Greek mu U+03BC are accepted)."""

ANGLE_RAD: dict[str, float] = {"rad": 1.0, "mrad": 1e-3, "deg": math.pi / 180}
PROBABILITY: dict[str, float] = {"": 1.0, "%": 1e-2}

QUANTITY_UNITS: dict[str, dict[str, float]] = {"time": TIME_NS, "angle": ANGLE_RAD, "probability": PROBABILITY}

KEY_QUANTITY: dict[str, tuple[str, str]] = {
    "t1_us": ("time", "us"),
    "t2_us": ("time", "us"),
    "duration_ns": ("time", "ns"),
    "readout_error": ("probability", ""),
    "avg_infidelity": ("probability", ""),
    "overrotation": ("angle", "rad"),
    "axis_error": ("angle", "rad"),
    "z_phase": ("angle", "rad"),
    "cphase": ("angle", "rad"),
    "swap_angle": ("angle", "rad"),
}
"""Model key -> (quantity, the unit the model uses)."""


def unit_factor(key: str, unit: str) -> float | None:
    """Factor taking a value of ``key`` given in ``unit`` to the model's unit; None if the unit
    does not fit the quantity.

    >>> unit_factor("t1_us", "ms"), unit_factor("duration_ns", "us"), unit_factor("t1_us", "rad")
    (1000.0, 1000.0, None)
    """
    quantity, native = KEY_QUANTITY[key]
    table = QUANTITY_UNITS[quantity]
    if unit not in table:
        return None
    return table[unit] / table[native]


def units_of(key: str) -> list[str]:
    """The units accepted for ``key`` (for messages)."""
    return [u or "(none)" for u in QUANTITY_UNITS[KEY_QUANTITY[key][0]]]


def pauli_to_average(pauli_error: float, num_qubits: int) -> float:
    """Average gate infidelity r = d/(d+1) · e_Pauli, d = 2^n (Nielsen, Phys. Lett. A 303, 249 (2002)).

    >>> pauli_to_average(0.003, 1), pauli_to_average(0.01, 2)
    (0.002, 0.008)
    """
    d = 2**num_qubits
    return d / (d + 1) * pauli_error


def clifford_to_gate(error_per_clifford: float, num_qubits: int, gates_per_clifford: float) -> float:
    """Average infidelity per physical gate from the error per Clifford, g gates per Clifford.

    r_gate = (d-1)/d · (1 - p_C^(1/g)), p_C = 1 - d r_C/(d-1) (depolarizing composition;
    Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)).

    >>> round(clifford_to_gate(0.00375, 1, 1.875), 10)
    0.0020035129
    """
    d = 2**num_qubits
    p_c = 1 - d * error_per_clifford / (d - 1)
    if p_c <= 0:
        raise ValueError(f"an error per Clifford of {error_per_clifford} leaves no depolarizing parameter "
                         f"(needs r < (d-1)/d = {(d - 1) / d:g})")
    return (d - 1) / d * -math.expm1(math.log(p_c) / gates_per_clifford)
