"""Atomic file writing: a temporary file in the same folder, then a rename."""

from __future__ import annotations

import contextlib
import gzip
import os
import tempfile


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, mode: str = "w", newline: str | None = None, compress: bool = False):
    """Open a temporary file next to ``path``; on success rename it over ``path``.

    A failure (an exception inside the block, or in the rename) leaves any
    existing ``path`` untouched and no temporary file behind.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.", suffix=".tmp", dir=folder)
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
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
