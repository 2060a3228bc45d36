"""The generators engine: first- and second-order error generators on dense vectors, any gate."""

from budget.engines.generators.engine import GeneratorsEngine

__all__ = ["GeneratorsEngine"]
