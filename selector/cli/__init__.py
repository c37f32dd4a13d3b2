"""Command line interface: `run(argv) -> int` and the console-script entry point `main`."""

from selector.cli.main import main, run

__all__ = ["main", "run"]
