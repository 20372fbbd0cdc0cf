"""Catalogue of hostile outputs: nothing lost, nothing half-written, nothing left behind.

Every command writes through one transaction (``curvespeed.io.atomic.OutputFiles``). Each case
here runs the command line and asserts the exit status, the one ``error:`` line (naming the
path and the reason) and, through a snapshot of the whole folder taken before and after, that
every input is byte for byte unchanged and that no output and no temporary file was left:

* **data loss**: an output naming an input (as given, through another spelling, a symbolic
  link or a hard link) is refused even with ``--force``;
* **outputs colliding**: two outputs naming one file (the default sidecar name included);
* **not a regular file**: a FIFO, a folder or a link to one is never replaced, even with
  ``--force``; a dangling link counts as an existing file;
* **paths that cannot be written**: a parent that is a file, a missing folder, a name too long
  for the folder (while a legal 255-byte name works), a read-only folder;
* **failures while writing**: a full disk on any of the outputs, a rename failing midway (the
  files already replaced come back), standard output on a full device, SIGTERM and Ctrl-C.

The behaviours are listed for users in ``docs/input_rules.md`` ("Output files").
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import curvespeed.io.atomic as atomic
from hostile_helpers import (assert_done, assert_refused, lines_of, no_traceback, planned_files,
                             run, snapshot, write)

LIMITS = "[limits]\nmax_speed_mps = 20.0\n"
#: The command line in a child process (``python -c RUN_CLI ARGS``).
RUN_CLI = "import sys; from curvespeed.cli.main import cli; cli(sys.argv[1:])"


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    """A route, its profile and sidecar, planned once and copied into each test's folder."""
    folder = tmp_path_factory.mktemp("planned")
    return {path.name: path.read_bytes() for path in planned_files(folder)}


@pytest.fixture
def files(tmp_path, planned):
    """r.csv (route), lim.toml (limits), p.csv and p.meta.json (profile and sidecar)."""
    for name, data in planned.items():
        (tmp_path / name).write_bytes(data)
    write(tmp_path, "lim.toml", LIMITS)
    return tmp_path


def expand(folder: Path, args) -> list[str]:
    """Arguments with ``{name}`` replaced by that path in ``folder``."""
    return [str(folder / a[1:-1]) if a.startswith("{") and a.endswith("}") else a for a in args]


def fifo(folder: Path, name: str) -> None:
    os.mkfifo(folder / name)


def symlink(target: str, name: str):
    def make(folder: Path) -> None:
        os.symlink(target, folder / name)
    return make


def hardlink(target: str, name: str):
    def make(folder: Path) -> None:
        os.link(folder / target, folder / name)
    return make


# -------------------------------------------------- refused before any work: id -> case
# (arguments, preparation or None, the path the message names, fragments of the message)

DATA_LOSS = {
    "plan -o the route --force": (
        ["plan", "{r.csv}", "-o", "{r.csv}", "--force"], None, "r.csv",
        ["-o/--output names the route file", "never writes over its input files, even with "
                                             "--force"]),
    "plan --meta the route --force": (
        ["plan", "{r.csv}", "-o", "{new.csv}", "--meta", "{r.csv}", "--force"], None, "r.csv",
        ["--meta names the route file"]),
    "plan -o the limits file --force": (
        ["plan", "{r.csv}", "-l", "{lim.toml}", "-o", "{lim.toml}", "--force"], None, "lim.toml",
        ["-o/--output names the limits file (-l/--limits)"]),
    "plan: the default sidecar name is the limits file": (
        ["plan", "{r.csv}", "-l", "{x.meta.json}", "-o", "{x.csv}", "--force"],
        lambda d: write(d, "x.meta.json", LIMITS), "x.meta.json",
        ["the sidecar (named after -o", "names the limits file"]),
    "route -o the route --force": (
        ["route", "{r.csv}", "-o", "{r.csv}", "--force"], None, "r.csv",
        ["names the route file"]),
    "export -o the profile --force": (
        ["export", "{p.csv}", "-o", "{p.csv}", "--force"], None, "p.csv",
        ["-o/--output names the profile"]),
    "export -o the profile's sidecar --force": (
        ["export", "{p.csv}", "-o", "{p.meta.json}", "--force"], None, "p.meta.json",
        ["names the profile's sidecar"]),
    "check --json the route --force": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--json", "{r.csv}", "--force"], None, "r.csv",
        ["--json names the route file"]),
    "check --csv the speeds file --force": (
        ["check", "{r.csv}", "--speeds", "{p.csv}", "--csv", "{p.csv}", "--force"], None,
        "p.csv", ["--csv names the speeds file (--speeds)"]),
    "check --json the limits file --force": (
        ["check", "{r.csv}", "-l", "{lim.toml}", "--json", "{lim.toml}", "--force"], None,
        "lim.toml", ["--json names the limits file"]),
    "plot -o the sidecar given with --meta --force": (
        ["plot", "{p.csv}", "--meta", "{m.svg}", "-o", "{m.svg}", "--force"],
        lambda d: shutil.copy(d / "p.meta.json", d / "m.svg"), "m.svg",
        ["-o/--output names the sidecar (--meta)"]),
    "plan -o the route spelled differently": (
        ["plan", "{r.csv}", "-o", "{sub/../r.csv}", "--force"],
        lambda d: (d / "sub").mkdir(), "r.csv", ["names the route file"]),
    "plan -o a symbolic link to the route": (
        ["plan", "{r.csv}", "-o", "{link.csv}", "--force"], symlink("r.csv", "link.csv"),
        "link.csv", ["names the route file"]),
    "plan -o a hard link to the route": (
        ["plan", "{r.csv}", "-o", "{hard.csv}", "--force"], hardlink("r.csv", "hard.csv"),
        "hard.csv", ["names the route file (", "r.csv)"]),
    "plan reads the route through a link, -o the file itself": (
        ["plan", "{link.csv}", "-o", "{r.csv}", "--force"], symlink("r.csv", "link.csv"),
        "r.csv", ["names the route file"]),
    "export -o a hard link to the profile": (
        ["export", "{p.csv}", "-o", "{t.csv}", "--force"], hardlink("p.csv", "t.csv"), "t.csv",
        ["names the profile"]),
    "check --json a hard link to the speeds file": (
        ["check", "{r.csv}", "--speeds", "{p.csv}", "--json", "{s.json}", "--force"],
        hardlink("p.csv", "s.json"), "s.json", ["names the speeds file"]),
}

COLLIDING = {
    "plan -o x.csv --meta x.csv": (
        ["plan", "{r.csv}", "-o", "{x.csv}", "--meta", "{x.csv}"], None, "x.csv",
        ["-o/--output and --meta name the same file"]),
    "plan -o x.svg --plot x.svg": (
        ["plan", "{r.csv}", "-o", "{x.svg}", "--plot", "{x.svg}"], None, "x.svg",
        ["-o/--output and --plot name the same file"]),
    "plan --meta f.svg --plot f.svg": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--meta", "{f.svg}", "--plot", "{f.svg}"], None,
        "f.svg", ["--meta and --plot name the same file"]),
    "plan --plot the default sidecar name": (
        ["plan", "{r.csv}", "-o", "{q.pdf}", "--plot", "{q.meta.pdf}", "--meta",
         "{q.meta.pdf}"], None, "q.meta.pdf", ["--meta and --plot name the same file"]),
    "plan --meta through a link to -o": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--meta", "{l.json}", "--force"],
        lambda d: (write(d, "q.csv", "old\n"), os.symlink("q.csv", d / "l.json")), "l.json",
        ["-o/--output and --meta name the same file"]),
    "check --json and --csv the same file": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--json", "{o.txt}", "--csv", "{o.txt}"],
        None, "o.txt", ["--json and --csv name the same file"]),
    "check --json and --csv hard-linked": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--json", "{a.json}", "--csv", "{b.csv}",
         "--force"],
        lambda d: (write(d, "a.json", "{}\n"), os.link(d / "a.json", d / "b.csv")), "b.csv",
        ["--json and --csv name the same file (", "a.json and", "b.csv)"]),
}

NOT_REGULAR = {}
for _command, _args in {
        "plan": ["plan", "{r.csv}", "-o", "{o}"],
        "route": ["route", "{r.csv}", "-o", "{o}"],
        "check --json": ["check", "{r.csv}", "--speed-kmh", "20", "--json", "{o}"],
        "export": ["export", "{p.csv}", "-o", "{o}", "--format", "csv"],
        "plot": ["plot", "{p.csv}", "-o", "{o.png}"]}.items():
    for _force in ([], ["--force"]):
        _o = "{o.png}" if _command == "plot" else "{o}"
        _name = "o.png" if _command == "plot" else "o"
        NOT_REGULAR[f"{_command} -o a FIFO {' '.join(_force)}".strip()] = (
            [a if a != "{o}" else _o for a in _args] + _force,
            lambda d, n=_name: fifo(d, n), _name,
            ["is a FIFO (named pipe), not a regular file", "even with --force"])
NOT_REGULAR.update({
    "plan -o a folder --force": (
        ["plan", "{r.csv}", "-o", "{dir.csv}", "--force"], lambda d: (d / "dir.csv").mkdir(),
        "dir.csv", ["is a folder, not a regular file"]),
    "plan --meta a link to a FIFO --force": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--meta", "{m.json}", "--force"],
        lambda d: (fifo(d, "pipe"), os.symlink("pipe", d / "m.json")), "m.json",
        ["is a FIFO (named pipe)"]),
    "plan --plot a FIFO after a good -o --force": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--plot", "{f.png}", "--force"],
        lambda d: fifo(d, "f.png"), "f.png", ["is a FIFO"]),
    "plan -o a dangling link without --force": (
        ["plan", "{r.csv}", "-o", "{gone.csv}"], symlink("nowhere/x.csv", "gone.csv"),
        "gone.csv", ["symbolic link to nowhere/x.csv, which does not exist",
                     "pass --force to replace the link"]),
    "check --json a dangling link without --force": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--json", "{gone.json}"],
        symlink("missing.json", "gone.json"), "gone.json", ["does not exist"]),
})

UNWRITABLE = {
    "plan -o under a file": (
        ["plan", "{r.csv}", "-o", "{r.csv/p.csv}"], None, "r.csv/p.csv",
        ["is a file, not a folder"]),
    "route -o in a missing folder": (
        ["route", "{r.csv}", "-o", "{nowhere/g.csv}"], None, "nowhere/g.csv",
        ["folder", "does not exist; create it first"]),
    "check --csv under a file's name with a folder after it": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--csv", "{lim.toml/x/c.csv}"], None,
        "lim.toml/x/c.csv", ["is a file, not a folder"]),
    "export -o a name of 256 bytes": (
        ["export", "{p.csv}", "-o", "{" + "t" * 252 + ".csv}"], None, "t" * 252 + ".csv",
        ["the file name is 256 bytes long, more than the 255 its folder allows"]),
    "plan --meta a name of 300 bytes": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--meta", "{" + "m" * 295 + ".json}"], None,
        "m" * 295, ["300 bytes long"]),
    "plan -o a folder name with a slash": (
        ["plan", "{r.csv}", "-o", "{newdir}/"], None, "newdir", ["needs a file name"]),
    "plot -o an existing figure without --force": (
        ["plot", "{p.csv}", "-o", "{f.png}"], lambda d: write(d, "f.png", b"old figure"),
        "f.png", ["file exists; pass --force"]),
    "plan --meta existing without --force": (
        ["plan", "{r.csv}", "-o", "{q.csv}", "--meta", "{m.json}"],
        lambda d: write(d, "m.json", "{}\n"), "m.json", ["file exists"]),
    "export -o existing without --force": (
        ["export", "{p.csv}", "-o", "{t.csv}"], lambda d: write(d, "t.csv", "old\n"), "t.csv",
        ["file exists"]),
    "route -o existing without --force": (
        ["route", "{r.csv}", "-o", "{g.csv}"], lambda d: write(d, "g.csv", "old\n"), "g.csv",
        ["file exists"]),
    "check --csv existing without --force": (
        ["check", "{r.csv}", "--speed-kmh", "20", "--csv", "{c.csv}"],
        lambda d: write(d, "c.csv", "old\n"), "c.csv", ["file exists"]),
}

REFUSED_OUTPUTS = {**DATA_LOSS, **COLLIDING, **NOT_REGULAR, **UNWRITABLE}


@pytest.mark.parametrize("case", list(REFUSED_OUTPUTS))
def test_output_refused_and_nothing_changed(case, files):
    args, prepare, named, fragments = REFUSED_OUTPUTS[case]
    if prepare is not None:
        prepare(files)
    before = snapshot(files)
    result = run(*expand(files, args))
    assert_refused(result, files, before, None if named is None else named, fragments)


def test_a_legal_255_byte_name_is_written(files):
    # the temporary file has a short name of its own, so the longest name the folder allows
    # works (the temporary name used to be built from the output's name and overflowed)
    out = files / ("t" * 251 + ".csv")
    before = snapshot(files)
    result = run("export", files / "p.csv", "-o", out)
    assert_done(result, files, before, written=[out])


def test_force_replaces_a_dangling_link_with_the_file(files):
    os.symlink("nowhere/x.csv", files / "gone.csv")
    before = snapshot(files)
    result = run("export", files / "p.csv", "-o", files / "gone.csv", "--force")
    assert_done(result, files, before, written=[files / "gone.csv"])
    assert not (files / "gone.csv").is_symlink() and not (files / "nowhere").exists()


def test_force_replaces_a_link_not_the_file_it_names(files):
    # the output named is the link; the file it pointed to (not an input) is left alone
    write(files, "other.csv", "someone else's file\n")
    os.symlink("other.csv", files / "t.csv")
    result = run("export", files / "p.csv", "-o", files / "t.csv", "--force")
    assert result.exit_code == 0, result.output
    assert (files / "other.csv").read_text() == "someone else's file\n"
    assert (files / "t.csv").read_text().startswith("time_s,")


# -------------------------------------------------------------- failures while writing

def fail_on_write(monkeypatch, n: int, err=errno.ENOSPC):
    """Make the n-th output written (1-based) fail as a full disk does."""
    calls = []
    real = atomic._write_file

    def write_file(path, data):
        calls.append(path)
        if len(calls) == n:
            raise OSError(err, os.strerror(err), path)
        real(path, data)

    monkeypatch.setattr(atomic, "_write_file", write_file)


@pytest.mark.parametrize("n, which", [(1, "q.csv"), (2, "q.meta.json"), (3, "f.png")])
def test_full_disk_on_any_output_of_plan_leaves_none(n, which, files, monkeypatch):
    # a full disk on the profile, its sidecar or the figure (a --plot that fails): all or none
    fail_on_write(monkeypatch, n)
    before = snapshot(files)
    result = run("plan", files / "r.csv", "-o", files / "q.csv", "--plot", files / "f.png")
    assert_refused(result, files, before, which, ["cannot write (No space left on device)",
                                                  "nothing was written"])


@pytest.mark.parametrize("args, which", [
    (["export", "{p.csv}", "-o", "{t.json}"], "t.json"),
    (["route", "{r.csv}", "-o", "{g.csv}"], "g.csv"),
    (["check", "{r.csv}", "--speed-kmh", "20", "--json", "{c.json}"], "c.json"),
])
def test_full_disk_on_other_commands(args, which, files, monkeypatch):
    fail_on_write(monkeypatch, 1)
    before = snapshot(files)
    result = run(*expand(files, args))
    assert_refused(result, files, before, which, ["No space left on device"])


def test_check_with_a_full_disk_is_exit_2_not_a_violation(files, monkeypatch):
    # check --speed-kmh 90 on the bend fails its curves (exit 1 without the fault); a write
    # error is bad output, exit 2, not a verdict
    fail_on_write(monkeypatch, 2)
    before = snapshot(files)
    result = run("check", files / "r.csv", "--speed-kmh", "90", "--json", files / "c.json",
                 "--csv", files / "c.csv")
    assert_refused(result, files, before, "c.csv", ["No space left on device"])


def test_rename_failing_midway_restores_the_replaced_files(files, monkeypatch):
    # --force over an existing profile and sidecar; the second rename fails: the first file,
    # already replaced, must come back as it was
    write(files, "q.csv", "old profile\n")
    write(files, "q.meta.json", "{\"old\": true}\n")
    real = os.replace
    calls = []

    def replace(src, dst):
        if str(dst).endswith("q.meta.json") and str(src).endswith(".part"):
            calls.append(dst)
            raise OSError(errno.EIO, os.strerror(errno.EIO), dst)
        return real(src, dst)

    monkeypatch.setattr(atomic.os, "replace", replace)
    before = snapshot(files)
    result = run("plan", files / "r.csv", "-o", files / "q.csv", "--force")
    assert calls, "the failure was not injected"
    assert_refused(result, files, before, "q.meta.json", ["Input/output error",
                                                          "existing files were left as they were"])


def test_rename_failing_midway_removes_new_files(files, monkeypatch):
    # without --force the files are linked into place; the second link fails: the first goes
    real = os.link

    def link(src, dst, **kwargs):
        if str(dst).endswith("q.meta.json"):
            raise OSError(errno.EIO, os.strerror(errno.EIO), dst)
        return real(src, dst, **kwargs)

    monkeypatch.setattr(atomic.os, "link", link)
    before = snapshot(files)
    result = run("plan", files / "r.csv", "-o", files / "q.csv")
    assert_refused(result, files, before, "q.meta.json", ["Input/output error"])


def test_read_only_folder(files, monkeypatch):
    # As root (CI) permission bits do not stop writes, so there the refusal the system would
    # give is injected where the temporary file is created; otherwise the folder is made
    # read-only for real. Either way the message is the same.
    ro = files / "ro"
    ro.mkdir()
    if os.geteuid() == 0:
        def refuse(*args, **kwargs):
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))
        monkeypatch.setattr(atomic.tempfile, "mkstemp", refuse)
    else:
        ro.chmod(0o555)
    before = snapshot(files)
    try:
        result = run("plan", files / "r.csv", "-o", ro / "q.csv")
    finally:
        ro.chmod(0o755)
    assert_refused(result, files, before, "q.csv", [f"cannot write in folder {ro}",
                                                    "Permission denied"])


def test_standard_output_on_a_full_device_is_exit_2(files):
    # a passing check printing to a full device: exit 2 with the reason, not 1 (a violation)
    # and not a traceback; /dev/full is the Linux device that refuses every write
    before = snapshot(files)
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-c", RUN_CLI, "check",
                               str(files / "r.csv"), "--speed-kmh", "20", "--json",
                               str(files / "c.json")], stdout=full, stderr=subprocess.PIPE,
                              text=True, timeout=120, cwd=files)
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr and "Exception ignored" not in done.stderr
    assert done.stderr.startswith("error: standard output: cannot be written (No space left "
                                  "on device)"), done.stderr
    assert snapshot(files) == before          # the report is part of the transaction


# ---------------------------------------------------------------------------------- signals

SLOW_WRITER = textwrap.dedent("""
    import sys, time
    import curvespeed.io.atomic as atomic
    real = atomic._write_file
    def slow(path, data):
        real(path, data[: len(data) // 2])       # half written, then stuck
        print("writing", flush=True)
        time.sleep(60)
    atomic._write_file = slow
    from curvespeed.cli.main import cli
    cli(sys.argv[1:])
""")


@pytest.mark.parametrize("signum, status", [(signal.SIGTERM, 143), (signal.SIGINT, 130)])
def test_signal_while_writing_leaves_no_temporary_and_keeps_the_old_file(signum, status, files):
    # The child stops in the middle of writing the profile (a slow disk, made deterministic by
    # a writer that says when it is stuck); the signal must remove every temporary file and
    # leave the existing profile as it was.
    write(files, "q.csv", "old profile\n")
    before = snapshot(files)
    child = subprocess.Popen([sys.executable, "-c", SLOW_WRITER, "plan", str(files / "r.csv"),
                              "-o", str(files / "q.csv"), "--force"], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True, cwd=files)
    try:
        for line in child.stdout:
            if line.startswith("writing"):
                break
        assert [p.name for p in files.glob(".cs-*.part")], "no temporary file while writing"
        child.send_signal(signum)
        _, err = child.communicate(timeout=60)
    finally:
        child.kill()
    assert child.returncode == status, err
    assert "Traceback" not in err and err.startswith(
        f"error: interrupted ({signal.Signals(signum).name}); no output file was written"), err
    assert snapshot(files) == before


def test_interrupted_library_write_keeps_the_old_file(tmp_path):
    out = tmp_path / "p.csv"
    out.write_text("old,complete\n1,2\n")
    with pytest.raises(KeyboardInterrupt):
        with atomic.atomic_open(out, force=True) as fh:
            fh.write("station_m,speed_mps\n0.0000,")
            raise KeyboardInterrupt            # as if the user pressed Ctrl-C mid-write
    assert out.read_text() == "old,complete\n1,2\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.csv"]


def test_handlers_are_restored_after_a_command(files):
    before = {s: signal.getsignal(s) for s in atomic.CLEANUP_SIGNALS}
    result = run("route", files / "r.csv", "-o", files / "g.csv")
    assert result.exit_code == 0, result.output
    assert {s: signal.getsignal(s) for s in atomic.CLEANUP_SIGNALS} == before


# ------------------------------------------------------------- every command, one write path

@pytest.mark.parametrize("args, written", [
    (["plan", "{r.csv}", "-o", "{q.csv}", "--plot", "{q.svg}"],
     ["q.csv", "q.meta.json", "q.svg"]),
    (["route", "{r.csv}", "-o", "{g.csv}"], ["g.csv"]),
    (["check", "{r.csv}", "--speed-kmh", "20", "--json", "{c.json}", "--csv", "{c.csv}"],
     ["c.json", "c.csv"]),
    (["export", "{p.csv}", "-o", "{t.json}"], ["t.json"]),
])
def test_every_command_writes_all_its_outputs_and_nothing_else(args, written, files):
    before = snapshot(files)
    result = run(*expand(files, args))
    no_traceback(result)
    assert_done(result, files, before, written=[files / w for w in written])
    assert not lines_of(result, "error:")


def test_files_given_as_outputs_are_not_read_as_inputs_before_the_check(files):
    # the output check runs before anything is read: a refused output never costs a read of
    # a broken input (the refusal names the output, not the input)
    write(files, "broken.csv", "not a route\n")
    write(files, "g.csv", "old\n")
    before = snapshot(files)
    result = run("route", files / "broken.csv", "-o", files / "g.csv")
    assert_refused(result, files, before, "g.csv", ["file exists"])


def test_write_text_atomic_refuses_a_fifo_for_library_callers(tmp_path):
    os.mkfifo(tmp_path / "pipe.csv")
    from curvespeed.errors import OutputError

    with pytest.raises(OutputError, match="is a FIFO"):
        atomic.write_text_atomic("x\n", tmp_path / "pipe.csv", force=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pipe.csv"]
