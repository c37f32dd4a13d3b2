"""selector: choose a traction motor, a reduction ratio and a tyre from catalogues, exactly."""

__version__ = "0.1.0"
