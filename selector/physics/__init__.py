"""Pure, vectorised physics: every function takes numpy arrays (or scalars) in SI units."""
