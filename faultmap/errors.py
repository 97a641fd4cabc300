"""The faultmap exception hierarchy.

Every error faultmap raises on purpose derives from :class:`FaultmapError`.
Subclasses also inherit the matching built-in exception so that callers who
catch ``ValueError`` or ``OSError`` keep working.

The command line turns any :class:`FaultmapError` into one line on stderr and
exit code 2; anything else is a bug and shows a traceback with ``-v``.
"""

from __future__ import annotations

__all__ = [
    "FaultmapError",
    "InputError",
    "InputFileError",
    "CRSError",
    "GeometryError",
    "ParameterError",
    "ProjectFileError",
    "OutputError",
    "NotAvailableError",
    "AnalysisError",
    "FaultmapWarning",
]


class FaultmapError(Exception):
    """Root of every error faultmap raises deliberately."""


class InputError(FaultmapError, ValueError):
    """Input data are unusable (wrong geometry, bad attribute values...)."""


class InputFileError(FaultmapError, OSError):
    """An input file is missing, unreadable or not spatial."""


class CRSError(InputError):
    """A coordinate reference system is missing, unusable or inconsistent."""


class GeometryError(InputError):
    """Feature geometries are of the wrong type or degenerate."""


class ParameterError(FaultmapError, ValueError):
    """A tool parameter is of the wrong type or out of its allowed range."""


class ProjectFileError(FaultmapError, ValueError):
    """A project (TOML) file has an unknown key, a wrong type or bad syntax."""


class OutputError(FaultmapError, OSError):
    """An output cannot be written (exists, folder missing, write failed)."""


class NotAvailableError(FaultmapError, NotImplementedError):
    """A registered tool or option is not built yet."""


class AnalysisError(FaultmapError, RuntimeError):
    """An analysis cannot produce a meaningful result from these data."""


class FaultmapWarning(UserWarning):
    """Warning category for faultmap notices (defaults used, features dropped)."""
