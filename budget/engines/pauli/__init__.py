"""The ``pauli`` engine: sparse Pauli propagation of first-order error generators (any gate)."""

from budget.engines.pauli.engine import PauliEngine

__all__ = ["PauliEngine"]
