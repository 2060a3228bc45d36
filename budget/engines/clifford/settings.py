"""The settings of the clifford engine that its passes read (budget/engines/clifford/engine.py)."""

from __future__ import annotations

from typing import Protocol


class Settings(Protocol):
    """What the passes read of the engine (budget/engines/clifford/engine.py, CliffordEngine)."""

    name: str
    max_unrolled: int
    orbit_baby: int
    second_order: bool
    qubit_map: bool | str
    prune_observables: bool
