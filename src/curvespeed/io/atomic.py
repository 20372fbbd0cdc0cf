"""Atomic file output: write to a temporary file in the target folder, then rename.

An error or an interruption never leaves a truncated file behind, and an existing file is only
replaced when the caller says so.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import OutputError


def check_writable(path: str | os.PathLike, force: bool) -> Path:
    """Raise :class:`OutputError` if ``path`` exists (without ``force``) or its folder does not."""
    p = Path(path)
    if p.exists() and not force:
        raise OutputError(f"{p}: file exists; pass --force to replace it or choose another name")
    if p.exists() and p.is_dir():
        raise OutputError(f"{p}: is a folder; give a file name")
    if not p.parent.exists():
        raise OutputError(f"{p}: folder {p.parent} does not exist; create it first")
    return p


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, force: bool = False, mode: str = "w", newline: str | None = ""):
    """Open ``path`` for writing through a temporary file that is renamed into place on success.

    Text mode writes UTF-8 with ``\\n`` line ends whatever the platform, so output is byte-identical
    across machines.
    """
    p = check_writable(path, force)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=p.parent)
    try:
        if "b" in mode:
            fh = os.fdopen(fd, mode)
        else:
            fh = os.fdopen(fd, mode, encoding="utf-8", newline=newline)
        with fh:
            yield fh
        # mkstemp creates the file readable by its owner only; give it the usual permissions
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text_atomic(text: str, path: str | os.PathLike, force: bool = False) -> Path:
    """Write ``text`` to ``path`` through :func:`atomic_open`; return the path."""
    with atomic_open(path, force) as fh:
        fh.write(text)
    return Path(path)
