"""Exception and warning classes of matgen.

Every error that matgen raises on purpose derives from :class:`MatgenError`. The command line turns a
``MatgenError`` into one message on standard error and exit status 2; any other exception is a bug.
Messages name the file, texel, layer, band or field at fault and the allowed range.
"""

from __future__ import annotations


class MatgenError(Exception):
    """Base class of every error matgen raises deliberately."""


class ParameterError(MatgenError, ValueError):
    """A parameter is NaN, infinite, of the wrong type or outside its allowed range."""


class BandError(ParameterError):
    """A band set is empty, unsorted, overlapping or outside a dataset's range."""


class StackError(ParameterError):
    """A layer stack handed to the transport engine is malformed."""


class ConfigError(MatgenError, ValueError):
    """A configuration or spec file (TOML / JSON) is malformed or names unknown keys."""


class DataError(MatgenError):
    """Vendored or user-supplied data (spectra, response curves, tables) is missing or inconsistent."""


class FitError(MatgenError):
    """A profile or spectrum cannot be fitted (empty, NaN, negative, degenerate)."""


class TableError(MatgenError):
    """A lookup table or table job folder is missing, incomplete, corrupt or inconsistent."""


class ImageError(MatgenError):
    """A pigment map or texture cannot be read or written, or holds invalid texels."""


class PathError(MatgenError):
    """A path escapes the folder it must stay in, or cannot be written."""


class LockError(MatgenError):
    """Another process holds the lock of a job or output folder."""


class DependencyError(MatgenError, ImportError):
    """An optional dependency is missing; the message says how to install it."""


class LimitError(MatgenError):
    """A request exceeds a configured safety ceiling (image size, photons, table size)."""


class MatgenWarning(UserWarning):
    """Base class of matgen's warnings."""


class ClampWarning(MatgenWarning):
    """A value was clamped into the range a consumer (renderer, table) accepts."""


class ColourSpaceWarning(MatgenWarning):
    """An input image carries a colour-space tag that matgen ignores (maps are non-colour data)."""
