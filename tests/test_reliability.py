"""The reliability promise, measured (see /work/shared/RELIABILITY.md, "The tests that prove it").

A user who is killed, fills the disk, shares the file with another instance or
hand-edits it loses at most the change in flight; a file the tool cannot read
is refused in one line and never overwritten.  Every test here checks what is
on disk (bytes, folder listing) against what the tool acknowledged, never the
tool's own account of what it did.
"""

from __future__ import annotations

import collections
import errno
import fnmatch
import hashlib
import math
import os
import pathlib
import random
import select
import shutil
import signal
import socket
import stat
import subprocess
import sys
import tempfile
import time

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from model.design.stage import default_design
from model.errors import StageledgerError
from model.files import ledger, savefile
from model.files.designfile import (
    MAX_FILE_BYTES,
    comment_lines,
    dumps_checked_document,
    dumps_document,
    read_document,
)
from model.files.historyfile import entry_text
from model.files.savefile import LockHeld, SaveError
from model.files.session import DesignSession, create
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
GEOPHONE = ROOT / "saved_designs" / "geophone_preamp.toml"
CABLE = ROOT / "saved_designs" / "cable_driver.toml"
DEMOS = (GEOPHONE, CABLE)
NAME = "design.toml"

# Values read back from a file are compared with a relative tolerance of 1e-12:
# TOML floats round-trip exactly through repr, so anything looser than that
# would only hide a unit or rounding mistake.
RTOL = 1e-12


# -- helpers ---------------------------------------------------------------------------------

def copy_demo(folder: pathlib.Path, demo: pathlib.Path = GEOPHONE, name: str = NAME) -> pathlib.Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    shutil.copyfile(demo, path)
    return path


def temporaries(path: pathlib.Path) -> list:
    """Files in the folder that look like a save's temporary (``.NAME.*.tmp``)."""
    return sorted(n for n in os.listdir(path.parent) if fnmatch.fnmatch(n, f".{path.name}.*.tmp"))


def temp_owner(path: pathlib.Path, temp: str) -> int | None:
    """The pid a temporary's name carries (``.NAME.PID.TOKEN.tmp``), None if it carries none."""
    first = temp[len(path.name) + 2:].split(".", 1)[0]
    return int(first) if first.isdigit() else None


def child_env() -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env["PYTHONDONTWRITEBYTECODE"] = "1"  # an unprivileged child must not try to write __pycache__
    return env


class Lines:
    """Lines from a child's stdout, with a timeout so a stuck child fails the test instead of hanging it."""

    def __init__(self, stream):
        self.fd = stream.fileno()
        self.buffer = b""

    def next(self, timeout: float = 20.0) -> list:
        deadline = time.monotonic() + timeout
        while b"\n" not in self.buffer:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([self.fd], [], [], left)[0]:
                raise AssertionError("the child process went silent")
            chunk = os.read(self.fd, 65536)
            if not chunk:
                raise AssertionError(f"the child process ended; it last said {self.buffer!r}")
            self.buffer += chunk
        line, self.buffer = self.buffer.split(b"\n", 1)
        return line.decode().split(" ", 2)


def cli(capsys, *args) -> tuple:
    """(exit status, stdout, stderr) of one in-process command."""
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def assert_one_line_refusal(code: int, err: str) -> None:
    # Exit status 2 is "bad file or argument"; 3 would be an internal fault, also one line.
    assert code == 2, err
    assert "Traceback" not in err
    assert len(err.splitlines()) == 1, err
    assert err.startswith("stageledger: ")


@pytest.fixture(scope="module")
def logged_design(tmp_path_factory) -> bytes:
    """Bytes of a demo after a few logged changes, one undo and one redo: a file with a real history."""
    path = copy_demo(tmp_path_factory.mktemp("logged"))
    with DesignSession(path) as s:
        s.commit({"stage.rc": "10k"}, note='more gain, "quoted" — and ünïcode')
        s.commit({"source.vpk": "5m", "load.rl": "open"})
        s.commit({"environment.ambient": 25})
        s.undo(note="too warm")
        s.redo()
    return path.read_bytes()


# -- 1. kill loop ----------------------------------------------------------------------------

# One interpreter imports the model once and forks an editor per round: starting
# 200 fresh interpreters would cost about 80 s, while a fork costs milliseconds.
# Each forked editor is a real process with its own lock and file descriptors,
# and it is SIGKILLed exactly as a separate program would be.
EDITOR_FORKER = r'''
import os, sys
from model.files.session import DesignSession

def edit(path):
    session = DesignSession(path)
    while True:
        # Each value is new (it grows with the entry number), so every commit is a change.
        value = (len(session.history) + 1) * 1e-5
        entry = session.commit({"source.vpk": value})
        os.write(1, f"ack {entry.number} {value!r}\n".encode())

for line in sys.stdin:
    pid = os.fork()
    if pid == 0:
        try:
            edit(line.strip())
        except BaseException as exc:
            os.write(1, f"error {exc!r}\n".encode())
        finally:
            os._exit(1)
    os.write(1, f"child {pid} -\n".encode())
    # Reaping only after the test has killed the child keeps its pid from being reused meanwhile.
    _, status = os.waitpid(pid, 0)
    os.write(1, f"reaped {pid} {status}\n".encode())
'''


def check_after_kill(path: pathlib.Path, acks: dict, known: int) -> int:
    """The file after a kill: parses, holds every acknowledged change, at most one more."""
    doc = read_document(path)  # must parse: a DesignFileError here fails the test
    count = len(doc.history)
    on_disk = max([known, *acks])
    # One commit may have been saved but killed before its acknowledgement was printed.
    assert on_disk <= count <= on_disk + 1, (count, on_disk)
    for number, value in acks.items():
        entry = doc.history[number - 1]
        assert entry.action == ledger.SET
        assert [c.key for c in entry.changes] == ["source.vpk"]
        assert math.isclose(entry.changes[0].new, value, rel_tol=RTOL)
    if acks:
        last = max(acks)
        assert math.isclose(ledger.replay(doc.history, last).source.vpk, acks[last], rel_tol=RTOL)
    # Nothing edits the file but the editors, so the design shown must be the ledger's last state.
    assert doc.design == ledger.replay(doc.history)
    return count


def run_kill_loop(tmp_path: pathlib.Path, kills: int, seed: int, kills_per_file: int = 25) -> dict:
    rng = random.Random(seed)
    script = tmp_path / "editor_forker.py"
    script.write_text(EDITOR_FORKER, encoding="utf-8")
    log = open(tmp_path / "forker.stderr", "wb")
    forker = subprocess.Popen([sys.executable, str(script)], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                              stderr=log, cwd=tmp_path, env=child_env())
    lines = Lines(forker.stdout)
    live = None
    stats = collections.Counter()
    try:
        done = 0
        while done < kills:
            path = copy_demo(tmp_path / f"run{done}")
            # Start the history in-process so every later save adds exactly one entry.
            with DesignSession(path) as s:
                s.commit({"source.vpk": 1e-5})
            known, acks = len(s.history), {}
            may_leave_temps = set()  # editors since the last one known to have saved
            for _ in range(min(kills_per_file, kills - done)):
                forker.stdin.write(f"{path}\n".encode())
                forker.stdin.flush()
                wanted = rng.choice((0, 1, 1, 2, 3))
                got = 0
                while live is None or got < wanted:
                    kind, *rest = lines.next()
                    assert kind != "error", rest
                    if kind == "child":
                        live = int(rest[0])
                    elif kind == "ack":
                        acks[int(rest[0])] = float(rest[1])
                        got += 1
                # Up to about one commit's time more, so kills land before, inside and after saves.
                time.sleep(rng.uniform(0.0, 0.03 if wanted else 0.05))
                os.kill(live, signal.SIGKILL)
                while True:
                    kind, *rest = lines.next()
                    assert kind != "error", rest
                    if kind == "ack":  # printed before the kill, so it must be on disk
                        acks[int(rest[0])] = float(rest[1])
                        got += 1
                    elif kind == "reaped":
                        status = int(rest[1])
                        assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL, status
                        break
                pid, live = live, None
                known = check_after_kill(path, acks, known)
                if got:
                    may_leave_temps = {pid}
                else:
                    may_leave_temps.add(pid)
                left = temporaries(path)
                stats["left a temporary"] += bool(left)
                # A temporary may belong only to an editor that has not been followed by a save.
                assert all(temp_owner(path, t) in may_leave_temps for t in left), (left, may_leave_temps)
                stats["kills"] += 1
                stats["acks"] += got
                done += 1
            # One more save, in-process: afterwards nothing but the design and its lock may remain.
            with DesignSession(path) as s:
                s.commit({"source.vpk": (len(s.history) + 1) * 1e-5})
            assert temporaries(path) == []
            assert sorted(os.listdir(path.parent)) == [NAME, NAME + ".lock"]
            check_after_kill(path, acks, known)
    finally:
        if live is not None:
            os.kill(live, signal.SIGKILL)
        forker.stdin.close()
        forker.kill()
        forker.wait(timeout=10)
        forker.stdout.close()
        log.close()
    return stats


def test_kill_loop_reduced(tmp_path):
    stats = run_kill_loop(tmp_path, kills=20, seed=20261201, kills_per_file=10)
    assert stats["kills"] == 20


@pytest.mark.slow
def test_kill_loop_full(tmp_path):
    stats = run_kill_loop(tmp_path, kills=200, seed=1234)
    assert stats["kills"] == 200
    # The children did real work between kills, not just die at start-up.
    assert stats["acks"] >= 100, stats


def test_a_killed_writers_temporary_is_removed_by_the_next_save(tmp_path):
    # What a SIGKILL between creating the temporary and renaming it leaves behind.
    path = copy_demo(tmp_path)
    stale = tmp_path / f".{NAME}.999999.0badf00d.tmp"
    stale.write_bytes(path.read_bytes()[:100])
    with DesignSession(path) as s:
        s.commit({"stage.rc": "10k"})
    assert temporaries(path) == []
    # Another design's temporaries in the same folder are not this save's business.
    other = tmp_path / ".other.toml.999999.0badf00d.tmp"
    other.write_bytes(b"x")
    with DesignSession(path) as s:
        s.commit({"stage.rc": "12k"})
    assert other.exists()


# -- 2. fault injection ----------------------------------------------------------------------

FAULTED = ("open", "write", "fsync", "replace")
ERRNOS = {errno.ENOSPC: "full", errno.EIO: "input/output", errno.EACCES: "permission",
          errno.EROFS: "read-only"}


class FaultyOs:
    """Stands in for the ``os`` module inside model.files.savefile only (the rest of the process,
    pytest included, keeps the real one).  Counts calls; makes the k-th call of one function
    fail; with ``chunk`` every write is short, as a signal or a full pipe can make it."""

    def __init__(self, fail: str | None = None, k: int = 0, err: int = 0, chunk: int | None = None):
        self.fail, self.k, self.err, self.chunk = fail, k, err, chunk
        self.calls = collections.Counter()

    def __getattr__(self, name):
        return getattr(os, name)

    def _count(self, name: str) -> None:
        self.calls[name] += 1
        if name == self.fail and self.calls[name] == self.k:
            raise OSError(self.err, os.strerror(self.err))

    def open(self, *args, **kwargs):
        self._count("open")
        return os.open(*args, **kwargs)

    def write(self, fd, data):
        self._count("write")
        return os.write(fd, data[: self.chunk] if self.chunk else data)

    def fsync(self, fd):
        self._count("fsync")
        return os.fsync(fd)

    def replace(self, src, dst):
        self._count("replace")
        return os.replace(src, dst)


CHUNK = 700  # bytes per write: a file with history takes several writes, so faults hit mid-file


def _saves(folder: pathlib.Path, logged_design: bytes) -> pathlib.Path:
    folder.mkdir()
    path = folder / NAME
    path.write_bytes(logged_design)
    return path


@pytest.fixture(scope="module")
def clean_save_calls(tmp_path_factory, logged_design) -> collections.Counter:
    """How often one clean save calls each faulted function."""
    path = _saves(tmp_path_factory.mktemp("count") / "d", logged_design)
    counter = FaultyOs(chunk=CHUNK)
    with DesignSession(path) as s:
        real = savefile.os
        savefile.os = counter
        try:
            s.commit({"stage.rc": "12k"})
        finally:
            savefile.os = real
    # If saving stopped going through these functions the matrix below would test nothing.
    assert all(counter.calls[name] >= 1 for name in FAULTED), counter.calls
    assert counter.calls["write"] >= 3, counter.calls
    return counter.calls


@pytest.mark.parametrize("err", ERRNOS, ids=errno.errorcode.get)
@pytest.mark.parametrize("function", FAULTED)
def test_every_failing_call_of_a_save_leaves_the_file_and_session_as_they_were(
        tmp_path, monkeypatch, logged_design, clean_save_calls, function, err):
    for k in range(1, clean_save_calls[function] + 1):
        path = _saves(tmp_path / f"call{k}", logged_design)
        with DesignSession(path) as s:
            design, history, fingerprint = s.design, list(s.history), s.fingerprint
            faulty = FaultyOs(function, k, err, chunk=CHUNK)
            monkeypatch.setattr(savefile, "os", faulty)
            with pytest.raises(SaveError) as info:
                s.commit({"stage.rc": "12k"})
            monkeypatch.setattr(savefile, "os", os)
            assert faulty.calls[function] >= k  # the fault really fired
            message = str(info.value)
            assert "not saved" in message and ERRNOS[err] in message and "\n" not in message
            assert path.read_bytes() == logged_design, f"{function} #{k}"
            assert sorted(os.listdir(path.parent)) == [NAME, NAME + ".lock"], f"{function} #{k}"
            assert (s.design, s.history, s.fingerprint) == (design, history, fingerprint)
            # With the fault gone, the same change saves and the file holds it.
            entry = s.commit({"stage.rc": "12k"})
        doc = read_document(path)
        assert entry.number == len(history) + 1
        assert doc.history == s.history and len(doc.history) == len(history) + 1
        assert math.isclose(doc.design.stage.rc, 12e3, rel_tol=RTOL)
        assert temporaries(path) == []


@pytest.mark.parametrize("function", FAULTED)
def test_a_failing_new_file_leaves_no_file_behind(tmp_path, monkeypatch, function):
    # `new` has no original to keep: "not saved" must mean there is no file at all,
    # even when the fault comes after the rename (the directory fsync).
    design = default_design("common-emitter")
    path = tmp_path / NAME
    counter = FaultyOs()
    monkeypatch.setattr(savefile, "os", counter)
    create(str(tmp_path / "count.toml"), design)
    monkeypatch.setattr(savefile, "os", os)
    for k in range(1, counter.calls[function] + 1):
        monkeypatch.setattr(savefile, "os", FaultyOs(function, k, errno.EIO))
        with pytest.raises(SaveError, match="not saved"):
            create(str(path), design)
        monkeypatch.setattr(savefile, "os", os)
        assert not path.exists(), f"{function} #{k}"
        assert temporaries(path) == []
    create(str(path), design)
    assert read_document(path).design == design


def test_short_writes_still_produce_the_whole_file(tmp_path, monkeypatch, logged_design):
    path = _saves(tmp_path / "short", logged_design)
    faulty = FaultyOs(chunk=1)  # the worst case: one byte per write
    with DesignSession(path) as s:
        monkeypatch.setattr(savefile, "os", faulty)
        s.commit({"stage.rc": "12k"})
        monkeypatch.setattr(savefile, "os", os)
        expected = dumps_checked_document(s.design, [entry_text(e) for e in s.history]).encode("utf-8")
    assert faulty.calls["write"] == len(expected)
    assert path.read_bytes() == expected
    assert read_document(path).history == s.history
    assert temporaries(path) == []


@pytest.fixture
def unprivileged(tmp_path):
    """A runner for commands that must meet real permission checks.

    Root ignores permission bits through the capabilities CAP_DAC_OVERRIDE
    and CAP_DAC_READ_SEARCH, so as root the command runs under setpriv with
    those two dropped from its bounding set: still uid 0, but a mode-555
    folder or a mode-000 file then refuses it as it would any user.
    (Dropping to 'nobody' does not work here: the interpreter may live under
    /root, which only root can enter.)
    """
    prefix = []
    if os.geteuid() == 0:
        setpriv = shutil.which("setpriv")
        if setpriv is None:
            pytest.skip("running as root, where permission bits do not apply, and setpriv is not installed")
        prefix = [setpriv, "--bounding-set=-dac_override,-dac_read_search", "--"]
        probe = tmp_path / "probe"
        probe.mkdir(mode=0o555)
        tried = subprocess.run([*prefix, sys.executable, "-c", f"open({str(probe / 'x')!r}, 'w')"],
                               capture_output=True, timeout=60)
        probe.chmod(0o755)
        probe.rmdir()
        if tried.returncode == 0:
            pytest.skip("running as root and setpriv could not drop the capabilities that bypass permission bits")

    def run(*args):
        return subprocess.run([*prefix, sys.executable, "-m", "tui", *map(str, args)], capture_output=True,
                              text=True, env=child_env(), cwd=tmp_path, timeout=60)
    try:
        yield tmp_path, run
    finally:
        for p in (tmp_path, *tmp_path.iterdir()):
            p.chmod(0o755)  # so pytest can clean up


def test_read_only_folder_for_real_exits_2_with_not_saved(unprivileged, capsys):
    folder, run = unprivileged
    path = copy_demo(folder)
    # The lock file exists and is writable, so the refusal comes from the save itself.
    lock = pathlib.Path(str(path) + ".lock")
    lock.touch()
    lock.chmod(0o666)
    before = path.read_bytes()
    folder.chmod(0o555)
    proc = run("set", path, "stage.rc=10k")
    assert_one_line_refusal(proc.returncode, proc.stderr)
    assert "not saved" in proc.stderr and "permission" in proc.stderr
    assert path.read_bytes() == before
    assert temporaries(path) == []
    # Once the folder is writable again, the same change saves.
    folder.chmod(0o755)
    code, _, err = cli(capsys, "set", path, "stage.rc=10k")
    assert code == 0, err
    assert math.isclose(read_document(path).design.stage.rc, 10e3, rel_tol=RTOL)


# -- 3. locking ------------------------------------------------------------------------------

#: How long the holder keeps the lock (s).  A refusal that waited for the lock
#: instead of refusing at once would take all of it, so "did not wait" is
#: judged against half of it: a margin no scheduling delay on a loaded machine
#: comes near, where a bound of a second or so could fail by chance.
HOLD = 120.0
NO_WAIT = HOLD / 2

HOLDER = r'''
import sys, time
from model.files.session import DesignSession
session = DesignSession(sys.argv[1])
print("locked", flush=True)
time.sleep(%r)
''' % HOLD


def test_a_second_writer_is_refused_and_readers_still_work(tmp_path, capsys):
    path = copy_demo(tmp_path / "shared")
    with DesignSession(path) as s:  # a history, so `history` and `diff FILE@N` have something to show
        s.commit({"stage.rc": "10k"})
    script = tmp_path / "holder.py"
    script.write_text(HOLDER, encoding="utf-8")
    holder = subprocess.Popen([sys.executable, str(script), str(path)], stdout=subprocess.PIPE,
                              cwd=tmp_path, env=child_env())
    try:
        assert Lines(holder.stdout).next() == ["locked"]
        before = path.read_bytes()

        started = time.monotonic()
        with pytest.raises(LockHeld) as info:
            DesignSession(path)
        assert time.monotonic() - started < NO_WAIT
        assert info.value.holder["pid"] == holder.pid
        assert info.value.holder["host"] == socket.gethostname()
        assert f"pid {holder.pid}" in str(info.value) and socket.gethostname() in str(info.value)

        started = time.monotonic()
        code, out, err = cli(capsys, "set", path, "stage.rc=12k")
        assert time.monotonic() - started < NO_WAIT
        assert_one_line_refusal(code, err)
        assert f"pid {holder.pid}" in err and socket.gethostname() in err
        assert path.read_bytes() == before

        # Reading needs no lock.
        for args in (("report", path), ("history", path), ("history", path, "--json"),
                     ("diff", f"{path}@1", path), ("set", path, "stage.rc=12k", "--dry-run")):
            code, out, err = cli(capsys, *args)
            assert code == 0 and out and not err, args
        with DesignSession(path, lock=False) as reader:
            assert reader.history and math.isclose(reader.design.stage.rc, 10e3, rel_tol=RTOL)
            with pytest.raises(StageledgerError, match="read-only"):
                reader.commit({"stage.rc": "12k"})
        assert path.read_bytes() == before

        holder.kill()  # SIGKILL: no chance to release anything itself
        holder.wait(timeout=10)
        started = time.monotonic()
        with DesignSession(path) as s:  # the kernel dropped the dead holder's lock: no wait either
            assert time.monotonic() - started < NO_WAIT
            s.commit({"stage.rc": "12k"})
        assert math.isclose(read_document(path).design.stage.rc, 12e3, rel_tol=RTOL)
    finally:
        if holder.poll() is None:
            holder.kill()
            holder.wait(timeout=10)
        holder.stdout.close()


# -- 4. external edits -----------------------------------------------------------------------

def _same_size_edit(data: bytes) -> bytes:
    edited = data.replace(b"rc = 8200.0", b"rc = 9100.0", 1)
    assert edited != data and len(edited) == len(data)
    return edited


@pytest.mark.parametrize("edit", ["append", "same-size-same-mtime", "delete"])
def test_a_file_changed_on_disk_is_not_overwritten(tmp_path, edit):
    path = copy_demo(tmp_path)
    with DesignSession(path) as s:
        s.commit({"stage.rc": "8k2", "source.vpk": "3m"})  # the session already holds a change of its own
        design, history = s.design, list(s.history)
        data = path.read_bytes()
        if edit == "append":
            external = data + b"\n"
            path.write_bytes(external)
        elif edit == "same-size-same-mtime":
            # Size and mtime alone would call this unchanged; only the content tells.
            info = os.stat(path)
            external = _same_size_edit(data)
            path.write_bytes(external)
            os.utime(path, ns=(info.st_atime_ns, info.st_mtime_ns))
        else:
            external = None
            path.unlink()
        with pytest.raises(SaveError, match="changed on disk") as info:
            s.commit({"stage.rc": "10k"})
        assert "not saved" in str(info.value)
        if external is None:
            assert not path.exists()
        else:
            assert path.read_bytes() == external
        assert s.design == design and s.history == history
        assert temporaries(path) == []


def _edit_in_place_keeping_size_and_mtime(path: pathlib.Path) -> bytes:
    info = os.stat(path)
    data = path.read_bytes()
    edited = data.replace(b"vcc = 9.0", b"vcc = 8.0", 1)
    assert edited != data and len(edited) == len(data)
    with open(path, "r+b") as handle:  # the same inode, as an editor that writes in place leaves it
        handle.write(edited)
    os.utime(path, ns=(info.st_atime_ns, info.st_mtime_ns))
    return edited


def _edit_by_rename_with_the_same_bytes(path: pathlib.Path) -> bytes:
    # An editor's own atomic save that changed nothing but the inode: a new file, not the one read.
    data = path.read_bytes()
    other = path.with_name("editor-save.tmp")
    other.write_bytes(data)
    info = os.stat(path)
    os.utime(other, ns=(info.st_atime_ns, info.st_mtime_ns))
    os.replace(other, path)
    return data


def _edit_by_appending(path: pathlib.Path) -> bytes:
    with open(path, "ab") as handle:
        handle.write(b"\n")
    return path.read_bytes()


HAND_EDITS = {"in-place-same-size-same-mtime": _edit_in_place_keeping_size_and_mtime,
              "rename-same-bytes": _edit_by_rename_with_the_same_bytes,
              "append": _edit_by_appending}


@pytest.mark.parametrize("edit", list(HAND_EDITS))
def test_a_hand_edit_between_the_temporarys_fsync_and_the_rename_is_kept(tmp_path, monkeypatch, capsys, edit):
    """Issue 16 item 2: the edit lands after the first check and after the
    temporary is written and synced, just before the rename; the last look
    before the rename must see it.  No timing: the edit runs inside fsync."""
    path = copy_demo(tmp_path)
    real_fsync, edited = os.fsync, []

    def fsync_then_edit(fd):
        real_fsync(fd)
        if not edited and stat_is_regular(fd) and os.fstat(fd).st_ino != os.stat(path).st_ino:
            edited.append(HAND_EDITS[edit](path))  # the temporary is synced: now the other writer

    monkeypatch.setattr(savefile.os, "fsync", fsync_then_edit)
    code, out, err = cli(capsys, "set", path, "stage.rc=10k")
    assert edited, "the hand edit never ran: the save no longer syncs its temporary"
    assert_one_line_refusal(code, err)
    assert "changed on disk" in err and "not saved" in err
    assert path.read_bytes() == edited[0]
    assert temporaries(path) == []


def stat_is_regular(fd: int) -> bool:
    return stat.S_ISREG(os.fstat(fd).st_mode)


# -- 5. bad input through `set` --------------------------------------------------------------

def _bad_files():
    good = GEOPHONE.read_bytes()
    return {
        "malformed-toml": good.replace(b"[stage]", b"[stage", 1),
        "bom": b"\xef\xbb\xbf" + good,
        "invalid-utf8": good.replace(b"geophone", b"geo\xff\xfephone", 1),
        "deep-nesting": good + b"\ndeep = " + b"[" * 4000 + b"]" * 4000 + b"\n",
        "huge-integer": good.replace(b"vcc = 9.0", b"vcc = " + b"9" * 5000, 1),
    }


@pytest.mark.parametrize("case", list(_bad_files()))
def test_set_refuses_an_unreadable_file_in_one_line(tmp_path, capsys, case):
    path = tmp_path / NAME
    path.write_bytes(_bad_files()[case])
    before = path.read_bytes()
    code, out, err = cli(capsys, "set", path, "stage.rc=10k")
    assert_one_line_refusal(code, err)
    assert str(path) in err and out == ""
    assert path.read_bytes() == before
    assert temporaries(path) == []


def test_set_refuses_an_oversized_file(tmp_path, capsys):
    path = copy_demo(tmp_path)
    os.truncate(path, MAX_FILE_BYTES + 1)  # sparse: no 32 MiB actually written
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    code, _, err = cli(capsys, "set", path, "stage.rc=10k")
    assert_one_line_refusal(code, err)
    assert "larger than" in err
    assert os.path.getsize(path) == MAX_FILE_BYTES + 1
    assert hashlib.sha256(path.read_bytes()).hexdigest() == digest
    assert temporaries(path) == []


def test_set_refuses_a_file_it_may_not_read(unprivileged):
    folder, run = unprivileged
    path = copy_demo(folder)
    lock = pathlib.Path(str(path) + ".lock")
    lock.touch()
    lock.chmod(0o666)  # so the refusal is about the design file, not the lock
    before = path.read_bytes()
    path.chmod(0o000)
    proc = run("set", path, "stage.rc=10k")
    path.chmod(0o644)
    assert_one_line_refusal(proc.returncode, proc.stderr)
    assert "permission denied" in proc.stderr and ".lock" not in proc.stderr
    assert path.read_bytes() == before


def test_set_refuses_a_directory(tmp_path, capsys):
    folder = tmp_path / "not-a-design"
    folder.mkdir()
    code, _, err = cli(capsys, "set", folder, "stage.rc=10k")
    assert_one_line_refusal(code, err)
    assert "directory" in err
    assert list(folder.iterdir()) == []


@pytest.mark.parametrize("item, words", [
    ("stage.rcc=10k", "stage.rcc"),      # a typo is named, never silently ignored
    ("stage.re=1k", "stage.re"),         # an emitter-follower key in a common-emitter design
    ("stage.rc=-5", "stage.rc"),         # non-physical
    ("stage.rc=lots", "stage.rc"),
    ("source.freq=0", "source.freq"),
    ("stage.rc10k", "KEY=VALUE"),        # no '='
    ("=10k", "KEY=VALUE"),
])
def test_set_refuses_a_bad_assignment(tmp_path, capsys, item, words):
    path = copy_demo(tmp_path)
    before = path.read_bytes()
    code, _, err = cli(capsys, "set", path, item)
    assert_one_line_refusal(code, err)
    assert words in err
    assert path.read_bytes() == before
    assert sorted(os.listdir(tmp_path)) in ([NAME], [NAME, NAME + ".lock"])


def test_hand_written_comments_are_kept_unless_dropping_them_is_allowed(tmp_path, capsys):
    path = copy_demo(tmp_path)
    text = path.read_text(encoding="utf-8").replace("[stage]\n", "[stage]\n# rc from the bench notebook\n", 1)
    path.write_text(text, encoding="utf-8")
    before = path.read_bytes()
    code, _, err = cli(capsys, "set", path, "stage.rc=10k")
    assert_one_line_refusal(code, err)
    assert "comment" in err
    assert path.read_bytes() == before

    code, _, err = cli(capsys, "set", path, "stage.rc=10k", "--drop-comments")
    assert code == 0, err
    saved = path.read_text(encoding="utf-8")
    assert "bench notebook" not in saved and comment_lines(saved) == ()
    assert math.isclose(read_document(path).design.stage.rc, 10e3, rel_tol=RTOL)


def test_new_refuses_to_overwrite(tmp_path, capsys):
    path = copy_demo(tmp_path)
    before = path.read_bytes()
    for args in (("new", path), ("new", path, "--from", CABLE)):
        code, _, err = cli(capsys, *args)
        assert_one_line_refusal(code, err)
        assert "already exists" in err
        assert path.read_bytes() == before
    assert temporaries(path) == []


# -- 6. hypothesis: round trips and a fuzzed loader ------------------------------------------

_finite = dict(allow_nan=False, allow_infinity=False)
COMMON = {
    "source.vpk": st.floats(0.0, 0.02, **_finite),
    "source.freq": st.floats(1.0, 1e5, **_finite),
    "load.rl": st.one_of(st.just("open"), st.floats(1e3, 1e6, **_finite)),
    "load.cl": st.floats(0.0, 1e-9, **_finite),
    "environment.ambient": st.floats(-20.0, 60.0, **_finite),
    "name": st.text(max_size=30),
    "notes": st.text(max_size=120),
}
BY_TOPOLOGY = {
    "common-emitter": {**COMMON, "stage.rc": st.floats(1e3, 2e4, **_finite), "stage.re1": st.floats(0, 500, **_finite)},
    "emitter-follower": {**COMMON, "stage.re": st.floats(500.0, 5e3, **_finite)},
}
STARTS = ("geophone", "cable", "new-common-emitter", "new-emitter-follower")


@st.composite
def steps(draw, topology):
    keys = BY_TOPOLOGY[topology]
    out = []
    # Weighted so that undo and redo usually have something to reverse.
    for _ in range(draw(st.integers(2, 8))):
        kind = draw(st.sampled_from(("set", "set", "set", "undo", "undo", "redo", "undo+redo", "reopen", "hand")))
        if kind in ("set", "hand"):
            chosen = draw(st.lists(st.sampled_from(sorted(keys)), min_size=1, max_size=2, unique=True))
            out.append((kind, {k: draw(keys[k]) for k in chosen}))
        else:
            out.append((kind, None))
    return out


@st.composite
def histories(draw):
    start = draw(st.sampled_from(STARTS))
    topology = "emitter-follower" if start in ("cable", "new-emitter-follower") else "common-emitter"
    return start, draw(steps(topology))


def _start(path: pathlib.Path, start: str) -> None:
    if start == "geophone":
        shutil.copyfile(GEOPHONE, path)
    elif start == "cable":
        shutil.copyfile(CABLE, path)
    else:
        create(str(path), default_design(start.removeprefix("new-")))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(histories())
def test_generated_designs_and_histories_round_trip(plan):
    start, plan_steps = plan
    with tempfile.TemporaryDirectory() as folder:
        path = pathlib.Path(folder) / NAME
        _start(path, start)
        s = DesignSession(path)
        try:
            for kind, values in plan_steps:
                if kind == "reopen":
                    s.close()
                    s = DesignSession(path)
                    continue
                if kind == "hand":
                    # A person edits values in the file outside the tool, keeping the history.
                    try:
                        edited = s.preview(values).design
                    except StageledgerError:
                        continue
                    s.close()
                    path.write_text(dumps_document(edited, [entry_text(e) for e in s.history]), encoding="utf-8")
                    s = DesignSession(path)
                    assert s.design == edited
                    continue
                before = path.read_bytes()
                memory = (s.design, list(s.history))
                if kind == "undo+redo":
                    try:
                        s.undo()
                    except StageledgerError:
                        continue
                    s.redo()  # an undo just made can always be redone ...
                    assert s.design == memory[0]  # ... and gives back the design as it was
                    assert len(s.history) >= len(memory[1]) + 2
                    continue
                try:
                    if kind == "set":
                        s.commit(values)
                    elif kind == "undo":
                        s.undo()
                    else:
                        s.redo()
                except StageledgerError:
                    # A refused step (nothing to undo, a value the design rejects) changes nothing.
                    assert path.read_bytes() == before and (s.design, s.history) == memory
        finally:
            s.close()
        doc = read_document(path)
        assert doc.design == s.design
        assert doc.history == s.history
        assert [e.number for e in doc.history] == list(range(1, len(doc.history) + 1))
        if doc.history:
            # A file the tool wrote: re-serialising what was read gives back the very bytes on
            # disk.  (A demo no step managed to change is still the hand-written original.)
            # The tool ends its saves with the digest; a hand edit the plan ends with has none.
            dumps = dumps_checked_document if doc.verified_text is not None else dumps_document
            again = dumps(doc.design, [entry_text(e) for e in doc.history]).encode("utf-8")
            assert again == path.read_bytes()
        if doc.history and not s.hand_edits:
            assert ledger.replay(doc.history) == doc.design


def load_or_refuse(path: pathlib.Path) -> None:
    """read_document either loads or raises our own error, within 1 s of CPU, touching nothing.

    CPU time, not wall time: it counts the work the reading did (a runaway
    parse), not the time other processes on the machine took.
    """
    before, info = path.read_bytes(), os.stat(path)
    listing = sorted(os.listdir(path.parent))
    started = time.process_time()
    try:
        read_document(path)
    except StageledgerError as err:
        assert str(err)  # a refusal always says something; anything but our own errors fails the test
    assert time.process_time() - started < 1.0
    assert path.read_bytes() == before and os.stat(path).st_mtime_ns == info.st_mtime_ns
    assert sorted(os.listdir(path.parent)) == listing


def test_truncated_files_load_or_fail_cleanly(tmp_path, logged_design):
    path = tmp_path / NAME
    size = len(logged_design)
    offsets = set(range(0, 64)) | set(range(0, size, max(1, size // 300))) | set(range(size - 64, size))
    refused = 0
    for cut in sorted(offsets):
        path.write_bytes(logged_design[:cut])
        try:
            load_or_refuse(path)
        except AssertionError:
            raise AssertionError(f"truncated at byte {cut}") from None
        try:
            read_document(path)
        except StageledgerError:
            refused += 1
    # Most cuts break the history's last entry, so most must be refused rather than half-loaded.
    assert refused > len(offsets) // 2


JUNK = st.one_of(
    st.binary(min_size=1, max_size=16),
    st.sampled_from([b"[", b"]]", b"=", b'"', b"'''", b"#", b"\n[[history]]\n", b"\nentry = 1\n",
                     b"\xef\xbb\xbf", b"\xff", b"\x00", b"9" * 5000, b"[" * 3000, b"\r", b"\t"]),
)


@st.composite
def mutations(draw):
    edits = []
    for _ in range(draw(st.integers(1, 4))):
        kind = draw(st.sampled_from(("flip", "insert", "delete")))
        where = draw(st.floats(0.0, 1.0, exclude_max=True))
        if kind == "flip":
            edits.append((kind, where, draw(st.integers(1, 255))))
        elif kind == "insert":
            edits.append((kind, where, draw(JUNK)))
        else:
            edits.append((kind, where, draw(st.integers(1, 40))))
    return edits


def mutate(data: bytes, edits) -> bytes:
    buf = bytearray(data)
    for kind, where, arg in edits:
        at = int(where * len(buf)) if buf else 0
        if kind == "flip" and buf:
            buf[at] ^= arg
        elif kind == "insert":
            buf[at:at] = arg
        elif kind == "delete":
            del buf[at:at + arg]
    return bytes(buf)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(edits=mutations())
def test_mutated_files_with_history_load_or_fail_cleanly(tmp_path_factory, logged_design, edits):
    path = tmp_path_factory.getbasetemp() / "mutated" / NAME
    path.parent.mkdir(exist_ok=True)
    path.write_bytes(mutate(logged_design, edits))
    load_or_refuse(path)
