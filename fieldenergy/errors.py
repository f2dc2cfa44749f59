"""Exceptions raised by fieldenergy.

Every error a user can cause derives from :class:`FieldEnergyError`; the command line
turns it into a one-line message and exit status 2. Any other exception is a bug.
"""

from __future__ import annotations


class FieldEnergyError(Exception):
    """Base class of all errors fieldenergy raises for bad input or unsupported requests."""


class CaseError(FieldEnergyError, ValueError):
    """A case file is malformed, or a value in it is out of range.

    Parameters
    ----------
    message
        What is wrong, the value received and the value expected.
    path
        The file the problem is in (case file, points file), if known.
    where
        The coil, circuit or key the problem is at, for example ``"coil 'upper', key 'turns'"``.
    """

    def __init__(self, message: str, path: str | None = None, where: str | None = None) -> None:
        self.message = message
        self.path = path
        self.where = where
        parts = [p for p in (path, where) if p]
        prefix = ", ".join(parts)
        super().__init__(f"{prefix}: {message}" if prefix else message)


class GeometryError(FieldEnergyError, ValueError):
    """A conductor path is degenerate (open, self-overlapping, zero-length segments ...)."""


class DiscretisationError(FieldEnergyError, ValueError):
    """Discretisation settings cannot be met (too many segments, bad tolerance ...)."""


class ExportError(FieldEnergyError):
    """A result or field map cannot be written (unknown suffix, unwritable folder ...)."""


class CompareError(FieldEnergyError, ValueError):
    """A finite-element result cannot be compared with the reference field.

    Raised for an unreadable file, a mesh without a usable vector field, degenerate cells or
    units that do not match the case's.

    Parameters
    ----------
    message
        What is wrong, the value received and the value expected.
    path
        The result file the problem is in, if known.
    """

    def __init__(self, message: str, path: str | None = None) -> None:
        self.message = message
        self.path = path
        super().__init__(f"{path}: {message}" if path else message)


class FieldEnergyWarning(UserWarning):
    """Something in a case looks wrong but does not stop the computation (coils that touch ...)."""
