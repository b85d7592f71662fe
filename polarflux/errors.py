"""The one exception family of polarflux.

Every error a user can provoke with bad input or bad settings is a
:class:`PolarfluxError`; its message names the file, keyword or value and what
was expected, so that a batch can report it on one line and go on.
"""

from __future__ import annotations

__all__ = ["PolarfluxError", "MapFormatError", "SettingsError", "OutputExistsError"]


class PolarfluxError(Exception):
    """Base class of every error polarflux raises on purpose."""


class MapFormatError(PolarfluxError, ValueError):
    """A file or object cannot be read as a Carrington-rotation synoptic map.

    The message starts with the file name and says what is wrong.
    """


class SettingsError(PolarfluxError, ValueError):
    """A parameter value is outside what the method accepts."""


class OutputExistsError(PolarfluxError, FileExistsError):
    """An output file exists and overwriting was not asked for."""
