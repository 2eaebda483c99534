"""Exception hierarchy of hte.

Every error caused by what the user supplied (a lattice file, an option, a data file) derives from
:class:`InputError`; the command line turns it into a one-paragraph message and exit code 2.  Anything
else is an internal error (exit code 1).
"""


class HteError(Exception):
    """Base class of all errors raised on purpose by hte."""


class InputError(HteError, ValueError):
    """Something the user supplied is wrong; the message says where, what, and how to fix it."""


class LatticeFileError(InputError):
    """A lattice definition file is malformed or inconsistent."""


class ParameterError(InputError):
    """An option or parameter value is impossible or unknown."""


class DataFileError(InputError):
    """A measured-data file cannot be read or is inconsistent."""


class TableMismatchError(InputError):
    """A stored series table does not match the request (other lattice file, model or format)."""


class ResourceLimitError(InputError):
    """A request would exceed the memory or time the user allowed; the message carries the estimate."""
