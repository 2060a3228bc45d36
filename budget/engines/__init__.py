"""Engines: same inputs, same outputs, different reach (design.md §4).

One folder per engine (``exact/``, ``generators/``, ``clifford/``, ``pauli/``), shared tools in
``matrices/`` (dense) and ``frame/`` (Pauli frames), and one front door, :mod:`budget.engines.door`:
the registry, ``auto``'s order and cost estimates, and every refusal's wording. Nothing outside this
package chooses an engine. Every engine subclasses :class:`Engine` (required ``fits`` and ``run``,
declared optional capabilities, :class:`Unsupported` for the others) and says what it computed
besides the number in the typed records of :mod:`budget.engines.details`.
"""

from __future__ import annotations

from budget.engines.base import Engine, EngineResult, QuadraticForm, Unsupported
from budget.engines.details import Details
from budget.engines.door import ENGINE_NAMES, get_engine

__all__ = ["ENGINE_NAMES", "Details", "Engine", "EngineResult", "QuadraticForm", "Unsupported", "get_engine"]
