"""Exceptions that carry a message meant for the user (no traceback shown)."""

from __future__ import annotations


class SelectorError(Exception):
    """Base class of every error selector reports to the user."""


class InputError(SelectorError):
    """Bad input: a catalogue, a problem file or a command-line value (exit code 2).

    The message names the file, the row or key, the value, the rule and what to do.
    """


class ArgumentError(InputError, TypeError):
    """A library function was called with an argument of the wrong type or value (exit code 2 on the
    command line). Also a TypeError, so ``except TypeError`` keeps working; the message names the
    function, the parameter, what it got and what it takes."""


def argument_error(function: str, name: str, value, expected: str) -> ArgumentError:
    """The `ArgumentError` for ``function(name=value)`` that should have been ``expected``."""
    shown = repr(value)
    shown = shown if len(shown) <= 60 else shown[:57] + "..."
    return ArgumentError(f"{function}({name}={shown}): {name} must be {expected}, not {type(value).__name__}.")


class SolverUnavailableError(SelectorError):
    """The MILP solver (HiGHS through Pyomo) is missing or broken (exit code 1)."""


class Terminated(BaseException):
    """SIGTERM arrived (raised by the command line's signal handler; exit code 143). A BaseException,
    like KeyboardInterrupt, so that no ``except Exception`` swallows it and every ``finally`` runs."""
