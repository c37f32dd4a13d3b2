"""The exact selection engine: part tables, evaluation, bounds, model, search, verification."""
