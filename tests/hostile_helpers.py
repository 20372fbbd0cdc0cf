"""Shared steps of the hostile-input catalogue: run the command line, snapshot a folder, and
check that a refusal changed nothing.

A *snapshot* records every entry of a folder by name: regular files by the SHA-256 of their
bytes, symbolic links by their target, anything else (FIFOs, folders) by its kind, without
ever opening it (opening a FIFO would block). Comparing the snapshots before and after a
command shows at once that the inputs are unchanged and that nothing was left behind, not even
a temporary ``.part`` file.

Every route, profile and limit written here is invented for the tests.
"""

from __future__ import annotations

import contextlib
import hashlib
import math
import os
import signal
import stat
from pathlib import Path

import numpy as np
from click.testing import CliRunner

from curvespeed.cli.main import cli

#: How long one in-process command may take before the test fails instead of hanging (a FIFO
#: opened by mistake would block forever), seconds.
HANG_S = 60


def run(*args, hang_s: int = HANG_S):
    """Run ``curvespeed ARGS`` in this process; the result has exit_code and output."""
    with no_hang(hang_s):
        return CliRunner().invoke(cli, [str(a) for a in args])


@contextlib.contextmanager
def no_hang(seconds: int = HANG_S):
    """Fail with TimeoutError instead of blocking forever (SIGALRM; main thread only)."""
    def expire(signum, frame):
        raise TimeoutError(f"the command did not finish within {seconds} s (blocked?)")

    old = signal.signal(signal.SIGALRM, expire)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def lines_of(result, prefix: str) -> list[str]:
    return [line for line in result.output.splitlines() if line.startswith(prefix)]


def snapshot(folder: Path) -> dict[str, str]:
    """Every entry of ``folder`` (recursively) -> its content hash, link target or kind."""
    entries = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            path = Path(root) / name
            key = str(path.relative_to(folder))
            st = os.lstat(path)
            if stat.S_ISLNK(st.st_mode):
                entries[key] = "link -> " + os.readlink(path)
            elif stat.S_ISREG(st.st_mode):
                entries[key] = hashlib.sha256(path.read_bytes()).hexdigest()
            elif stat.S_ISDIR(st.st_mode):
                entries[key] = "folder"
            else:
                entries[key] = f"special {stat.S_IFMT(st.st_mode):o}"
    return entries


def no_traceback(result) -> None:
    """No Python traceback: the command ended by its own exit status."""
    assert "Traceback" not in result.output, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), \
        repr(result.exception)


def error_line(result, named, fragments=(), status: int = 2) -> str:
    """Exit ``status``, no traceback, exactly one ``error:`` line, naming ``named`` (if given)
    and holding every fragment, in plain numbers; return that line."""
    no_traceback(result)
    assert result.exit_code == status, result.output
    errors = lines_of(result, "error:")
    assert len(errors) == 1, result.output
    message = errors[0]
    if named is not None:
        assert str(named) in message, message
    for fragment in fragments:
        assert fragment in message, (fragment, message)
    assert "np.float64" not in result.output and "RuntimeWarning" not in result.output
    return message


def assert_refused(result, folder: Path, before: dict, named, fragments=(),
                   status: int = 2) -> str:
    """:func:`error_line`, and the folder exactly as it was (inputs unchanged, no output, no
    temporary file)."""
    message = error_line(result, named, fragments, status)
    after = snapshot(folder)
    assert after == before, {k: (before.get(k), after.get(k))
                             for k in set(before) | set(after) if before.get(k) != after.get(k)}
    return message


def assert_usage_error(result, folder: Path, before: dict, fragments=()) -> str:
    """Exit 2 with click's usage message ("Error: Invalid value for '--option': ...") holding
    every fragment, and the folder exactly as it was."""
    no_traceback(result)
    assert result.exit_code == 2, result.output
    errors = lines_of(result, "Error: Invalid value for")
    assert len(errors) == 1, result.output
    for fragment in fragments:
        assert fragment in errors[0], (fragment, errors[0])
    assert snapshot(folder) == before
    return errors[0]


def assert_done(result, folder: Path, before: dict, written=(), warned=None) -> None:
    """Exit 0, no traceback, inputs unchanged, exactly ``written`` new or changed files, no
    temporary files; with ``warned`` a warning line containing it."""
    no_traceback(result)
    assert result.exit_code == 0, result.output
    after = snapshot(folder)
    changed = {k for k in set(before) | set(after) if before.get(k) != after.get(k)}
    assert changed == {str(Path(w).relative_to(folder)) for w in written}, changed
    assert not [k for k in after if k.endswith((".part", ".old"))]
    if warned is not None:
        assert [w for w in lines_of(result, "warning:") if warned in w], result.output


def write(folder: Path, name: str, content) -> Path:
    path = folder / name
    path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return path


def csv_text(x, y, header="x_m,y_m") -> str:
    return header + "\n" + "".join(f"{a:.3f},{b:.3f}\n" for a, b in zip(x, y))


def bend_csv() -> str:
    """Invented bend: 100 m straight, then a 60 m radius arc turning 90 degrees left."""
    s = np.arange(0.0, 100.0 + 0.5 * math.pi * 60.0 + 1e-9, 5.0)
    theta = np.clip((s - 100.0) / 60.0, 0.0, None)
    x = np.where(s <= 100.0, s, 100.0 + 60.0 * np.sin(theta))
    y = np.where(s <= 100.0, 0.0, 60.0 * (1.0 - np.cos(theta)))
    return csv_text(x, y)


#: Open-ocean origin of the invented geographic routes (South Atlantic), degrees.
LAT0, LON0 = -35.0, -20.0


def latlon_bend_csv() -> str:
    """The invented bend as latitude/longitude near (LAT0, LON0)."""
    rows = bend_csv().splitlines()[1:]
    out = ["lat,lon"]
    for row in rows:
        x, y = map(float, row.split(","))
        out.append(f"{LAT0 + y / 111_000.0:.8f},"
                   f"{LON0 + x / (111_000.0 * math.cos(math.radians(LAT0))):.8f}")
    return "\n".join(out) + "\n"


def planned_files(folder: Path, geographic: bool = False) -> tuple[Path, Path, Path]:
    """Plan the invented bend: (route, profile, sidecar) in ``folder``."""
    route = write(folder, "r.csv", latlon_bend_csv() if geographic else bend_csv())
    profile = folder / "p.csv"
    result = run("plan", route, "-o", profile)
    assert result.exit_code == 0, result.output
    return route, profile, folder / "p.meta.json"


def replace_cell(csv: str, line: int, column: str, value: str) -> str:
    """``csv`` with the cell of ``column`` on file ``line`` (1-based) replaced by ``value``."""
    lines = csv.splitlines()
    header = lines[0].split(",")
    cells = lines[line - 1].split(",")
    cells[header.index(column)] = value
    lines[line - 1] = ",".join(cells)
    return "\n".join(lines) + "\n"
