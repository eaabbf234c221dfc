"""The one root of every exception a user can cause; the CLI prints these as one clean line.

This module imports nothing, so every layer (units, schema, ingest, api, commands) can import it
without cycles. A library exception subclasses ``BodyplanError`` and, where it stands in for a
builtin, that builtin too (``class UnitError(BodyplanError, ValueError)``), so callers catching the
builtin keep working. Anything else reaching the CLI is a bug and is shown as an internal error.
"""

from __future__ import annotations


class BodyplanError(Exception):
    """Root of bodyplan's own exceptions: a problem in the input, not in bodyplan."""


class OutputError(BodyplanError, FileExistsError):
    """An output path that would overwrite an input or a file of another kind."""


class ChoiceError(BodyplanError, LookupError):
    """A name (species, life stage, sex, …) that is not one of the valid choices."""
