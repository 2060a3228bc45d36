"""Error budgets for structured quantum circuits."""
