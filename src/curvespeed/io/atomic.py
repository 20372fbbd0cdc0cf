"""Output files: every output of a command checked first, then written as one transaction.

One write path for every command (and for the library's ``write_*`` functions):

1. **Before any work** (:meth:`OutputFiles.__enter__`) every output path is checked: it must
   not name an input of the command or another output (the same file by device and inode where
   it exists, and by resolved path, so symbolic and hard links count), an existing output must
   be a regular file (a folder, device, FIFO or socket is refused even with ``force``), a file
   or a dangling symbolic link is replaced only with ``force``, the folder must exist and the
   name must fit it. A short temporary file is then reserved next to each output, which proves
   the folder writable before any time is spent.
2. The command writes each output into its temporary file.
3. Leaving the ``with`` block without an error renames all of them into place; if one rename
   fails, the files already replaced are restored. On any error, or on SIGTERM or SIGINT
   (turned into :class:`Interrupted` while the block runs), every temporary file is removed and
   no output appears; existing files are untouched.

Every :class:`OSError` met on the way becomes an :class:`~curvespeed.errors.OutputError` naming
the path and the system's reason.
"""

from __future__ import annotations

import contextlib
import errno
import os
import signal
import stat
import tempfile
import threading
from dataclasses import dataclass
from pathlib import Path

from ..errors import OutputError

#: Temporary files are named ``.cs-XXXXXXXX.part`` (17 characters) in the output's folder, short
#: enough for any file name the folder accepts to stay writable (a name of 255 bytes included).
TEMP_PREFIX = ".cs-"
TEMP_SUFFIX = ".part"
#: Signals that remove the temporary files before the command ends.
CLEANUP_SIGNALS = (signal.SIGTERM, signal.SIGINT)

#: Errors of os.link that mean the file system has no hard links (some network and FAT file
#: systems): there a file is renamed into place after checking that the name is still free.
_NO_HARD_LINKS = {errno.EPERM, errno.EXDEV, errno.EMLINK, errno.ENOSYS,
                  getattr(errno, "ENOTSUP", errno.EOPNOTSUPP), errno.EOPNOTSUPP}

_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISFIFO, "a FIFO (named pipe)"),
          (stat.S_ISSOCK, "a socket"))


class Interrupted(KeyboardInterrupt):
    """SIGTERM or SIGINT arrived while outputs were pending; they were discarded."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum

    @property
    def name(self) -> str:
        return signal.Signals(self.signum).name


def file_kind(mode: int) -> str | None:
    """What a non-regular file is ("a folder", "a FIFO (named pipe)", ...); None if regular."""
    if stat.S_ISREG(mode):
        return None
    return next((name for test, name in _KINDS if test(mode)), "not a regular file")


def os_reason(exc: OSError) -> str:
    """The system's reason for ``exc`` in words ("No space left on device")."""
    return exc.strerror or (errno.errorcode.get(exc.errno or 0) or str(exc))


@dataclass(frozen=True)
class _Named:
    path: Path
    label: str
    text: str


def _identity(path: Path) -> tuple[str, tuple[int, int] | None]:
    """Resolved path, and (device, inode) of what it names if that exists."""
    real = os.path.normcase(os.path.realpath(path))
    try:
        st = os.stat(path)
    except OSError:
        return real, None
    return real, (st.st_dev, st.st_ino)


class OutputFiles:
    """The output files of one command, checked before any work and written all or none.

    Parameters
    ----------
    force : bool
        Replace existing regular files (and dangling symbolic links) at the output paths.
    signals : bool
        While the ``with`` block runs, turn SIGTERM and SIGINT into :class:`Interrupted` so the
        temporary files are removed (only in the main thread; the old handlers come back after).

    Examples
    --------
    >>> outputs = OutputFiles(force=False)                          # doctest: +SKIP
    >>> outputs.add_input("r.csv", "the route file")
    >>> outputs.add_output("p.csv", "-o/--output")
    >>> with outputs:          # checks every path, reserves temporary files
    ...     outputs.write_text("p.csv", compute_profile_text())
    ... # all outputs renamed into place here, or none on an error
    """

    def __init__(self, force: bool = False, signals: bool = True):
        self.force = force
        self.signals = signals
        self._inputs: list[_Named] = []
        self._outputs: list[_Named] = []
        self._temps: dict[str, str] = {}
        self._written: set[str] = set()
        self._old_handlers: dict[int, object] = {}

    # -- registering ---------------------------------------------------------------------------

    def add_input(self, path, label: str) -> None:
        """A file the command reads (``label`` says which: "the route file"); None is skipped."""
        if path is not None:
            self._inputs.append(_Named(Path(path), label, os.fspath(path)))

    def add_output(self, path, label: str) -> Path:
        """A file the command writes (``label`` names its option, e.g. "-o/--output")."""
        self._outputs.append(_Named(Path(path), label, os.fspath(path)))
        return Path(path)

    @property
    def paths(self) -> list[Path]:
        return [out.path for out in self._outputs]

    # -- checking ------------------------------------------------------------------------------

    def check(self) -> None:
        """Raise :class:`OutputError` for the first output that may not be written."""
        seen: list[tuple[_Named, tuple]] = []
        inputs = [(inp, _identity(inp.path)) for inp in self._inputs]
        for out in self._outputs:
            self._check_one(out)
            ident = _identity(out.path)
            for inp, other in inputs:
                if _same(ident, other):
                    raise OutputError(
                        f"{out.text}: {out.label} names {inp.label} ({inp.text}), which this "
                        "command reads; curvespeed never writes over its input files, even with "
                        "--force: choose another name")
            for prev, other in seen:
                if _same(ident, other):
                    both = "" if prev.text == out.text else f" ({prev.text} and {out.text})"
                    raise OutputError(
                        f"{out.text}: {prev.label} and {out.label} name the same file{both}; "
                        "give each output its own name")
            seen.append((out, ident))

    def _check_one(self, out: _Named) -> None:
        where = out.text
        if not out.path.name or out.path.name in (".", "..") or where.endswith(os.sep):
            raise OutputError(f"{where}: {out.label} needs a file name, not a folder")
        try:
            st = os.lstat(out.path)
        except FileNotFoundError:
            st = None
        except OSError as exc:
            if exc.errno == errno.ENAMETOOLONG:
                _check_name_length(out)
            raise _path_error(where, out.path, exc) from None
        if st is not None:
            if stat.S_ISLNK(st.st_mode):
                try:
                    st = os.stat(out.path)
                except OSError:
                    if not self.force:
                        raise OutputError(
                            f"{where}: is a symbolic link to {os.readlink(out.path)}, which does "
                            "not exist; pass --force to replace the link with the file, or "
                            "choose another name") from None
                    st = None
            kind = None if st is None else file_kind(st.st_mode)
            if kind is not None:
                raise OutputError(f"{where}: is {kind}, not a regular file; curvespeed writes "
                                  "only regular files and never replaces anything else, even "
                                  "with --force: give a file name")
            if st is not None and not self.force:
                raise OutputError(f"{where}: file exists; pass --force to replace it or choose "
                                  "another name")
        folder = out.path.parent
        try:
            fst = os.stat(folder)
        except FileNotFoundError:
            raise OutputError(f"{where}: folder {folder} does not exist; create it first") \
                from None
        except OSError as exc:
            raise _path_error(where, folder, exc) from None
        if not stat.S_ISDIR(fst.st_mode):
            raise OutputError(f"{where}: {folder} is {file_kind(fst.st_mode) or 'a file'}, not a "
                              "folder; give an output path inside a folder")
        _check_name_length(out)

    # -- the transaction -----------------------------------------------------------------------

    def __enter__(self) -> OutputFiles:
        self.check()
        self._install_handlers()
        try:
            for out in self._outputs:
                self._temps[out.text] = self._reserve(out)
        except BaseException:
            self._discard()
            self._restore_handlers()
            raise
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        with _signals_blocked():
            try:
                if exc_type is None:
                    missing = [o.text for o in self._outputs if o.text not in self._written]
                    if missing:
                        raise RuntimeError(f"outputs never written: {', '.join(missing)}")
                    self._commit()
            finally:
                self._discard()
                self._restore_handlers()

    def _reserve(self, out: _Named) -> str:
        try:
            fd, tmp = tempfile.mkstemp(prefix=TEMP_PREFIX, suffix=TEMP_SUFFIX,
                                       dir=out.path.parent)
        except OSError as exc:
            raise OutputError(f"{out.text}: cannot write in folder {out.path.parent} "
                              f"({os_reason(exc)}); choose another folder") from None
        os.close(fd)
        return tmp

    def _temp(self, path) -> tuple[_Named, str]:
        key = os.fspath(path)
        for out in self._outputs:
            if out.text == key:
                if key not in self._temps:
                    raise RuntimeError(f"{key}: write outputs inside the 'with' block")
                return out, self._temps[key]
        raise KeyError(f"{key} is not a registered output")

    def write_bytes(self, path, data: bytes) -> None:
        """Write ``data`` as the content of output ``path`` (into its temporary file)."""
        out, tmp = self._temp(path)
        try:
            _write_file(tmp, data)
        except OSError as exc:
            raise OutputError(f"{out.text}: cannot write ({os_reason(exc)}); nothing was "
                              "written") from None
        self._written.add(out.text)

    def write_text(self, path, text: str) -> None:
        """Write ``text`` as UTF-8 with the line ends it has (``\\n`` from every writer)."""
        self.write_bytes(path, text.encode("utf-8"))

    def _commit(self) -> None:
        """Rename every temporary file into place; on a failure restore what was replaced."""
        umask = os.umask(0)
        os.umask(umask)
        replaced: list[tuple[_Named, str | None]] = []
        current = self._outputs[0] if self._outputs else None
        try:
            for current in self._outputs:
                tmp = self._temps[current.text]
                os.chmod(tmp, 0o666 & ~umask)
                backup = self._backup(current)
                try:
                    if self.force:
                        os.replace(tmp, current.path)
                    else:
                        _rename_no_replace(tmp, current.path)
                except BaseException:
                    if backup is not None:           # the target was not touched
                        with contextlib.suppress(OSError):
                            os.unlink(backup)
                    raise
                del self._temps[current.text]
                replaced.append((current, backup))
        except OSError as exc:
            for out, backup in reversed(replaced):
                with contextlib.suppress(OSError):
                    if backup is not None:
                        os.replace(backup, out.path)
                    else:
                        os.unlink(out.path)
            if isinstance(exc, OutputError):
                raise
            raise OutputError(f"{current.text}: cannot write ({os_reason(exc)}); no output was "
                              "written and existing files were left as they were") from None
        for _, backup in replaced:
            if backup is not None:
                with contextlib.suppress(OSError):
                    os.unlink(backup)

    def _backup(self, out: _Named) -> str | None:
        """A hard link to the file about to be replaced (kept until every rename succeeded)."""
        if not self.force or not os.path.lexists(out.path):
            return None
        name = os.path.join(out.path.parent, f"{TEMP_PREFIX}{os.urandom(4).hex()}.old")
        try:
            os.link(out.path, name, follow_symlinks=False)
        except OSError:
            # no hard links here (some network and FAT file systems): keep a copy instead
            try:
                with open(out.path, "rb") as src:
                    _write_file(name, src.read())
            except BaseException:
                with contextlib.suppress(OSError):
                    os.unlink(name)
                raise
        return name

    def _discard(self) -> None:
        for tmp in list(self._temps.values()):
            with contextlib.suppress(OSError):
                os.unlink(tmp)
        self._temps.clear()

    def _install_handlers(self) -> None:
        if not (self.signals and self._outputs
                and threading.current_thread() is threading.main_thread()):
            return

        def interrupt(signum, frame):
            raise Interrupted(signum)

        for signum in CLEANUP_SIGNALS:
            self._old_handlers[signum] = signal.signal(signum, interrupt)

    def _restore_handlers(self) -> None:
        for signum, handler in self._old_handlers.items():
            signal.signal(signum, handler)
        self._old_handlers.clear()


def _check_name_length(out: _Named) -> None:
    """Refuse a file name longer than its folder allows (usually 255 bytes)."""
    try:
        name_max = os.pathconf(out.path.parent, "PC_NAME_MAX")
    except (OSError, ValueError):
        name_max = 255
    size = len(os.fsencode(out.path.name))
    if size > name_max:
        raise OutputError(f"{out.text}: the file name is {size} bytes long, more than the "
                          f"{name_max} its folder allows; choose a shorter name")


def _same(a: tuple, b: tuple) -> bool:
    return a[0] == b[0] or (a[1] is not None and a[1] == b[1])


def _path_error(where: str, path: Path, exc: OSError) -> OutputError:
    if isinstance(exc, NotADirectoryError):
        return OutputError(f"{where}: a part of the folder path {path} is a file, not a folder; "
                           "give an output path inside a folder")
    return OutputError(f"{where}: cannot use this path ({os_reason(exc)}); choose another name")


def _write_file(path: str, data: bytes) -> None:
    """Write ``data`` to the file ``path`` (the one place output bytes reach the disk)."""
    with open(path, "wb") as fh:
        fh.write(data)


def _rename_no_replace(tmp: str, path: Path) -> None:
    """Rename ``tmp`` to ``path`` unless something appeared there since the check."""
    try:
        os.link(tmp, path)
    except FileExistsError:
        raise OutputError(f"{path}: file exists (it appeared while the command ran); pass "
                          "--force to replace it or choose another name") from None
    except OSError as exc:
        if exc.errno not in _NO_HARD_LINKS:
            raise
        if os.path.lexists(path):
            raise OutputError(f"{path}: file exists (it appeared while the command ran); pass "
                              "--force to replace it or choose another name") from None
        os.replace(tmp, path)           # no hard links on this file system
        return
    os.unlink(tmp)


@contextlib.contextmanager
def _signals_blocked():
    """Hold SIGTERM and SIGINT back while files are renamed or removed (delivered after)."""
    main = threading.current_thread() is threading.main_thread()
    if not (main and hasattr(signal, "pthread_sigmask")):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, CLEANUP_SIGNALS)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


# -- one file at a time (library callers) --------------------------------------------------------

def check_writable(path: str | os.PathLike, force: bool) -> Path:
    """Raise :class:`OutputError` if ``path`` may not be written (see :class:`OutputFiles`)."""
    outputs = OutputFiles(force)
    outputs.add_output(path, "the output")
    outputs.check()
    return Path(path)


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, force: bool = False, mode: str = "w",
                newline: str | None = ""):
    """Open ``path`` for writing as one output of :class:`OutputFiles` (all or nothing).

    Yields an in-memory file; its content is written when the block ends without an error.
    Text mode writes UTF-8 with the line ends written (``\\n``), so output is byte-identical
    across machines. Signals are left to the caller's handlers.
    """
    import io

    outputs = OutputFiles(force, signals=False)
    outputs.add_output(path, "the output")
    with outputs:
        fh = io.BytesIO() if "b" in mode else io.StringIO(newline=newline)
        yield fh
        data = fh.getvalue()
        outputs.write_bytes(path, data if isinstance(data, bytes) else data.encode("utf-8"))


def write_text_atomic(text: str, path: str | os.PathLike, force: bool = False) -> Path:
    """Write ``text`` to ``path`` as one output (:class:`OutputFiles`); return the path."""
    outputs = OutputFiles(force, signals=False)
    outputs.add_output(path, "the output")
    with outputs:
        outputs.write_text(path, text)
    return Path(path)
