"""Exceptions with a user-facing meaning.

`LaminaInputError` is bad input from a user (a file, a key, a value); the
command line turns it into one message and exit code 2.  Everything else that
escapes is a bug and deserves a traceback.
"""
from __future__ import annotations


class LaminaError(Exception):
    """Base class of lamina's own errors."""


class LaminaInputError(LaminaError, ValueError):
    """Bad user input.

    ``where`` names the place (file, file:line, key path, parameter), ``expected``
    says what would have been right; the message reads
    ``"<where>: <problem> (expected <expected>)"``.
    """

    def __init__(self, problem: str, where: str | None = None, expected: str | None = None,
                 hint: str | None = None):
        self.problem = problem
        self.where = where
        self.expected = expected
        self.hint = hint
        text = problem
        if where:
            text = f"{where}: {text}"
        if expected:
            text = f"{text} (expected {expected})"
        super().__init__(text)


class FitFailedError(LaminaError):
    """A fit that ran but did not converge or could not be evaluated."""
