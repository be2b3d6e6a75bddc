"""Atomic file writing: a temporary file in the same folder, then a rename.

The temporary file is named ``.<name>.<random>.intervgnn.tmp``
(:data:`TEMP_SUFFIX`), so a writer killed before its rename leaves a file that
:func:`remove_stale_temps` recognises and removes on a later run, and nothing
else is ever taken for one.
"""

from __future__ import annotations

import contextlib
import glob
import gzip
import os
import tempfile

from .errors import WriteError

#: ending of every temporary file :func:`atomic_open` writes
TEMP_SUFFIX = ".intervgnn.tmp"


def _why(exc: OSError) -> str:
    return f"{exc.__class__.__name__}: {exc.strerror or exc}"


def _write_error(message: str, exc: OSError, path: str) -> WriteError:
    err = WriteError(message)
    err.errno, err.strerror, err.filename = exc.errno, exc.strerror, path
    return err


def make_folder(path: str | os.PathLike) -> None:
    """``os.makedirs(path, exist_ok=True)``, raising :class:`~intervgnn.errors.WriteError` naming ``path``."""
    try:
        os.makedirs(path, exist_ok=True)
    except OSError as exc:
        raise _write_error(f"{os.fspath(path)}: cannot create the folder ({_why(exc)})", exc, os.fspath(path)) from exc


def remove_stale_temps(folder: str | os.PathLike) -> list[str]:
    """Remove the temporary files of :func:`atomic_open` that a killed writer left in ``folder``; return their paths.

    Only names of the form ``.<name>.<random>.intervgnn.tmp`` are touched; a
    missing folder has none. A writer of the same folder running at this
    moment loses its temporary file, so call this before writing starts.

    Raises
    ------
    WriteError
        A stale file that cannot be removed (no permission).
    """
    folder = os.fspath(folder)
    removed = []
    for old in sorted(glob.glob(os.path.join(glob.escape(folder), ".*" + TEMP_SUFFIX))):
        try:
            os.remove(old)
        except FileNotFoundError:
            continue
        except OSError as exc:
            raise _write_error(f"{old}: cannot remove the stale temporary file ({_why(exc)})", exc, old) from exc
        removed.append(old)
    return removed


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, mode: str = "w", newline: str | None = None, compress: bool = False):
    """Open a temporary file next to ``path``; on success rename it over ``path``.

    A failure (an exception inside the block, or in the rename) leaves any
    existing ``path`` untouched and no temporary file behind. An operating
    system error (missing folder, no permission, disk full) is raised as
    :class:`~intervgnn.errors.WriteError` naming ``path``.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.", suffix=TEMP_SUFFIX, dir=folder)
    except OSError as exc:
        raise _write_error(f"{path}: cannot write the file ({_why(exc)})", exc, path) from exc
    os.close(fd)
    try:
        if compress:
            fh = gzip.open(tmp, mode + "t" if "b" not in mode else mode, encoding=None if "b" in mode else "utf-8")
        elif "b" in mode:
            fh = open(tmp, mode)
        else:
            fh = open(tmp, mode, newline=newline, encoding="utf-8")
        with fh:
            yield fh
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp creates 0600; give the usual permissions
        os.replace(tmp, path)
    except WriteError:
        raise
    except OSError as exc:
        if exc.filename is not None and os.fspath(exc.filename) not in (tmp, path):
            raise  # about another file (say, one the caller reads inside the block)
        raise _write_error(f"{path}: cannot write the file ({_why(exc)})", exc, path) from exc
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
