"""The clifford engine: error generators as Pauli strings through Clifford circuits, at scale."""

from budget.engines.clifford.engine import CliffordEngine

__all__ = ["CliffordEngine"]
