"""Studies built on the engine: explain, frontier, sweep, shortlist."""
