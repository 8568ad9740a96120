"""The error classes of pathgen.

One small tree with a root, :class:`PathgenError`.  Problems with what the
user gave (points, files, options) are :class:`InputError`, which is also a
``ValueError`` so that generic code can catch it.  The command line turns
every :class:`PathgenError` into one line on stderr and exit status 2,
except :class:`InternalCheckError` (exit status 3).
"""

from __future__ import annotations

__all__ = ["PathgenError", "InputError", "ExportError", "InternalCheckError"]


class PathgenError(Exception):
    """Root of every error pathgen raises on purpose."""


class InputError(PathgenError, ValueError):
    """Bad input: points, a file, or an option value.

    The message names what is wrong and where (argument, point index, or
    file and line), and a fix where there is one.
    """


class ExportError(PathgenError):
    """A file could not be written, or writing it would be unsafe."""


class InternalCheckError(PathgenError):
    """pathgen's own check of what it wrote failed: a bug, not bad input.

    Raised when a program read back from its text strays beyond the chord
    tolerance or cuts into the part; the message gives the figures, and no
    file is written.  The command line exits with status 3.
    """
