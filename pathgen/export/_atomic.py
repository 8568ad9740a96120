"""Atomic, refuse-to-overwrite file writing for every pathgen writer.

A file is first written to a temporary file in the same folder, flushed to
disk, and only then renamed over the final name (``os.replace``, atomic on
POSIX and Windows when both names are in one folder).  An error or an
interruption at any point before the rename leaves no file of the final
name behind and removes the temporary file; a program half-written is
never left for a controller to run.

An existing file is replaced only when the caller says so (``force=True``,
the command line's ``--force``); otherwise :class:`~pathgen.errors.ExportError`
says which file exists and how to overwrite it.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterator, Sequence

from ..errors import ExportError

__all__ = ["atomic_write", "atomic_paths", "check_target"]


def check_target(path, *, force: bool = False) -> Path:
    """Return ``path`` as a Path after checking that it may be written.

    Raises :class:`ExportError` when the folder does not exist, when the path
    names a folder, or when the file exists and ``force`` is False.

    >>> check_target("/no/such/folder/part.nc")
    Traceback (most recent call last):
    ...
    pathgen.errors.ExportError: cannot write /no/such/folder/part.nc: folder /no/such/folder does not exist
    """
    try:
        path = Path(os.fspath(path))
    except TypeError:
        raise ExportError(f"output path must be a file name, got {path!r}") from None
    if str(path) in ("", "."):
        raise ExportError("output path is empty")
    folder = path.parent
    if not folder.is_dir():
        raise ExportError(f"cannot write {path}: folder {folder} does not exist")
    if path.is_dir():
        raise ExportError(f"cannot write {path}: it is a folder")
    if path.exists() and not force:
        raise ExportError(f"{path} already exists; pass force=True (--force) to overwrite it")
    return path


def _file_mode(target: Path) -> int:
    """Permissions for the new file: the old file's, else 0o666 minus umask."""
    try:
        return target.stat().st_mode & 0o7777
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


@contextlib.contextmanager
def atomic_paths(paths: Sequence, *, force: bool = False) -> Iterator[list[Path]]:
    """Yield temporary paths; on success rename each over its final path.

    All targets are checked before anything is written, so a refusal leaves
    every file untouched.  If the body raises (or is interrupted), every
    temporary file is removed and no final file is created or changed.

    Parameters
    ----------
    paths : sequence of path-like
        The final file names.
    force : bool
        Replace existing files.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_paths([d / "a.txt"]) as (tmp,):
    ...     _ = tmp.write_text("hello")
    >>> (d / "a.txt").read_text()
    'hello'
    """
    targets = [check_target(p, force=force) for p in paths]
    if len({t.resolve() for t in targets}) != len(targets):
        raise ExportError("two outputs would be written to the same file: " + ", ".join(map(str, targets)))
    temps: list[Path] = []
    try:
        for t in targets:
            fd, name = tempfile.mkstemp(dir=t.parent, prefix=f".{t.name}.", suffix=".tmp")
            os.close(fd)
            temps.append(Path(name))
        yield list(temps)
        for tmp, t in zip(temps, targets):
            if not tmp.exists():
                raise ExportError(f"internal error: nothing was written for {t}")
            # flush the data to disk before the rename makes it visible
            with open(tmp, "rb+") as fh:
                os.fsync(fh.fileno())
            os.chmod(tmp, _file_mode(t))
        for tmp, t in zip(temps, targets):
            if not force and t.exists():
                raise ExportError(f"{t} appeared while writing; pass force=True (--force) to overwrite it")
        for tmp, t in zip(temps, targets):
            os.replace(tmp, t)
    except OSError as exc:
        raise ExportError(f"cannot write {targets[0] if len(targets) == 1 else 'outputs'}: {exc.strerror or exc}") from exc
    finally:
        for tmp in temps:
            with contextlib.suppress(OSError):
                tmp.unlink()


def atomic_write(path, data, *, force: bool = False) -> Path:
    """Write ``data`` (str as UTF-8 with "\\n" line ends, or bytes) atomically.

    Parameters
    ----------
    path : path-like
        Final file name; its folder must exist.
    data : str or bytes
        The whole content.
    force : bool
        Replace an existing file (default: refuse with ExportError).

    Returns
    -------
    pathlib.Path
        The path written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "note.txt"
    >>> atomic_write(p, "one\\n").read_text()
    'one\\n'
    >>> atomic_write(p, "two\\n")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pathgen.errors.ExportError: ... already exists; pass force=True (--force) to overwrite it
    """
    if isinstance(data, str):
        data = data.encode("utf-8")
    if not isinstance(data, (bytes, bytearray, memoryview)):
        raise ExportError(f"atomic_write needs str or bytes, got {type(data).__name__}")
    with atomic_paths([path], force=force) as (tmp,):
        with open(tmp, "wb") as fh:
            fh.write(data)
    return Path(os.fspath(path))
