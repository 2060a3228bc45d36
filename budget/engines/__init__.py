"""Engines: same inputs, same outputs, different reach (design.md §4).

``get_engine(name)`` returns an engine instance; modules are imported lazily so a missing optional
engine never breaks the others.
"""

from __future__ import annotations

from importlib import import_module

from budget.engines.base import Engine, EngineResult, QuadraticForm

_REGISTRY = {
    "exact": ("budget.engines.exact", "ExactEngine"),
    "generators": ("budget.engines.generators", "GeneratorsEngine"),
    "clifford": ("budget.engines.clifford", "CliffordEngine"),
    "pauli": ("budget.engines.pauli", "PauliEngine"),
}

ENGINE_NAMES: tuple[str, ...] = tuple(_REGISTRY)


def get_engine(name: str) -> Engine:
    """The engine called ``name`` (one of :data:`ENGINE_NAMES`)."""
    if name not in _REGISTRY:
        raise ValueError(f"engine {name!r}: expected one of {', '.join(ENGINE_NAMES)} or auto")
    module, cls = _REGISTRY[name]
    return getattr(import_module(module), cls)()


__all__ = ["ENGINE_NAMES", "Engine", "EngineResult", "QuadraticForm", "get_engine"]
