"""The error classes of pathgen.

One small tree with a root, :class:`PathgenError`.  Problems with what the
user gave (points, files, options) are :class:`InputError`, which is also a
``ValueError`` so that generic code can catch it.  The command line turns
every :class:`PathgenError` into one line on stderr and exit status 2.
"""

from __future__ import annotations

__all__ = ["PathgenError", "InputError", "ExportError"]


class PathgenError(Exception):
    """Root of every error pathgen raises on purpose."""


class InputError(PathgenError, ValueError):
    """Bad input: points, a file, or an option value.

    The message names what is wrong and where (argument, point index, or
    file and line), and a fix where there is one.
    """


class ExportError(PathgenError):
    """A file could not be written, or writing it would be unsafe."""
