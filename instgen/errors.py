"""One error hierarchy for everything a user can get wrong.

The command line catches :class:`InstgenError` only, prints its message as one
line on stderr and exits with code 2.  Any other exception is a bug and keeps
its traceback.
"""


class InstgenError(Exception):
    """Base class: a problem with the user's input, files or request."""


class InputError(InstgenError, ValueError):
    """A value given by the user (argument, spec string, option) is not valid."""


class FormatError(InstgenError):
    """A file cannot be read: malformed, truncated, or of an unknown version."""


class ConfigError(InstgenError):
    """A preset or configuration value is unknown or out of range."""


class WriteError(InstgenError, OSError):
    """A file could not be written (disk full, no permission, a folder in the way).

    Raised after the temporary file is removed, so the file that was there
    before is unchanged.  Also an :class:`OSError`, for callers that catch those.
    """


class ResourceError(InstgenError):
    """A request would need absurd time or memory on this machine; refused up front."""


class CertificationError(InstgenError):
    """A ground state could not be proven with the method that was asked for."""


class LibraryError(InstgenError):
    """The benchmark library is missing, damaged or of a newer schema."""


class ClusterError(InstgenError):
    """A Dask cluster cannot be reached, or was lost during a run."""
