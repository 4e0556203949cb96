"""Errors that reach the user: every message says what is wrong and what to do."""

from __future__ import annotations


class FormwiseError(ValueError):
    """A problem with the user's input (data or spec), worded for the user.

    The app shows the message in place of results; the command line prints it as one
    ``error: ...`` line and exits 2. It is never a programming error.
    """


class SpecError(FormwiseError):
    """The model specification is malformed: a key, column, transform or change is wrong."""


class DataError(FormwiseError):
    """The data cannot support the requested model (non-numeric, constant, collinear, ...)."""
