"""The exact engine: dense superoperators (and classical branches), for small registers."""

from budget.engines.exact.engine import ExactEngine

__all__ = ["ExactEngine"]
