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
import re
from pathlib import Path
from typing import Iterator, Sequence

from ..errors import ExportError

__all__ = ["atomic_write", "atomic_paths", "check_target", "Staging", "clean_stale", "staged_outputs"]

#: Longest file name most file systems take (bytes).
NAME_MAX = 255
#: Temporary names carry the writing process's id, so that a later run can
#: tell a killed run's leftovers from another live run's files.
_TEMP_NAME = re.compile(r"^\.(?:pathgen(\d+)-.*|.*\.pathgen(\d+)\.[^.]*\.tmp)$")


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
    import tempfile  # (here: a check that writes nothing does not import it)

    temps: list[Path] = []
    try:
        for t in targets:
            fd, name = tempfile.mkstemp(dir=t.parent, prefix=_temp_prefix(t.name), suffix=".tmp")
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


def _temp_prefix(name: str) -> str:
    """Prefix of a writer's temporary file: the final name when it fits."""
    tag = f".pathgen{os.getpid()}."
    if len(os.fsencode(name)) + len(tag) + 16 > NAME_MAX:
        import hashlib

        name = hashlib.sha1(os.fsencode(name)).hexdigest()[:16]
    return f".{name}{tag}"


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists, owned by someone else
        return True
    return True


def clean_stale(folder) -> list[Path]:
    """Remove temporary files that a killed pathgen run left in ``folder``.

    Only names pathgen gives its temporary files are touched, and only
    those of processes that no longer run (the name carries the process
    id).  Returns the files removed.
    """
    removed = []
    with contextlib.suppress(OSError):
        for entry in os.scandir(folder):
            m = _TEMP_NAME.match(entry.name)
            if m and entry.is_file(follow_symlinks=False) and not _alive(int(m.group(1) or m.group(2))):
                with contextlib.suppress(OSError):
                    os.unlink(entry.path)
                    removed.append(Path(entry.path))
    return removed


class Staging:
    """Write several outputs, then make them all appear together.

    :meth:`path` gives, for a final file name, a temporary name in the same
    folder with the same suffix (writers choose formats by suffix) for a
    writer to write with ``force=True``; :meth:`commit` renames every staged
    file over its final name after all were written.  Leaving the ``with``
    block by an error or an interruption before the commit removes every
    staged file, so a job's outputs appear all together or not at all.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with Staging() as stage:
    ...     _ = stage.path(d / "a.nc").write_text("G0 X0\\n")
    ...     _ = stage.path(d / "a.txt").write_text("report\\n")
    ...     sorted(p.name for p in d.iterdir() if not p.name.startswith("."))
    ...     _ = stage.commit()
    []
    >>> sorted(p.name for p in d.iterdir())
    ['a.nc', 'a.txt']
    """

    def __init__(self, *, force: bool = False):
        self.force = force
        self._pairs: list[tuple[Path, Path]] = []
        self._committed = False

    def __enter__(self) -> "Staging":
        return self

    def path(self, final, *, suffix: str | None = None) -> Path:
        """Temporary name for ``final`` (checked with :func:`check_target`).

        ``suffix``: the part of the name to keep at the end (default: the
        last suffix), e.g. ``".report.json"``.
        """
        final = check_target(final, force=self.force)
        keep = suffix if suffix is not None else final.suffix
        name = f".pathgen{os.getpid()}-{final.name}"
        if len(os.fsencode(name)) + 40 > NAME_MAX:  # room for a writer's own temporary name
            # files staged together (a report's .json and .txt) keep one base
            base = final.name[: -len(keep)] if keep and final.name.endswith(keep) else final.name
            import hashlib

            name = f".pathgen{os.getpid()}-{hashlib.sha1(os.fsencode(base)).hexdigest()[:16]}{keep}"
        tmp = final.with_name(name)
        self._pairs.append((tmp, final))
        return tmp

    def commit(self) -> list[Path]:
        """Rename every staged file over its final name; return the finals."""
        for tmp, final in self._pairs:
            if not tmp.exists():
                raise ExportError(f"internal error: nothing was written for {final}")
            if not self.force and final.exists():
                raise ExportError(f"{final} appeared while writing; pass force=True (--force) to overwrite it")
        try:
            for tmp, final in self._pairs:
                os.replace(tmp, final)
        except OSError as exc:
            raise ExportError(f"cannot write {final}: {exc.strerror or exc}") from exc
        self._committed = True
        return [final for _, final in self._pairs]

    def __exit__(self, *exc) -> None:
        for tmp, _ in self._pairs:
            with contextlib.suppress(OSError):
                tmp.unlink()
        return None


@contextlib.contextmanager
def staged_outputs(targets: dict, *, force: bool = False):
    """A job's outputs, staged: yields ``(stage, temporary)``.

    ``targets`` maps output kinds ("gcode", "report", "report_text", "dxf",
    "plot") to final paths; ``temporary`` maps the same kinds (but
    "report_text", which the report writer puts beside its JSON) to the
    names to write.  Leftovers of killed runs in the target folders are
    removed first; call ``stage.commit()`` when every file is written.
    """
    for folder in sorted({str(Path(p).parent) for p in targets.values()}):
        clean_stale(folder)
    with Staging(force=force) as stage:
        temporary = {k: stage.path(v, suffix=".report.json" if k == "report" else None)
                     for k, v in targets.items() if k != "report_text"}
        if "report" in temporary:
            stage.path(targets["report_text"], suffix=".report.txt")  # written beside the JSON
        yield stage, temporary


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
