"""Hostile files and hostile surroundings (issue 16): what is planted beside a
design, what its text holds, and where the output goes.

Every check looks at what is on disk (bytes, whether a file exists) or at the
bytes a real subprocess wrote, never at the tool's own account of it.
"""

from __future__ import annotations

import fcntl
import json
import os
import pathlib
import re
import shutil
import stat
import subprocess
import sys

import pytest

from model.files.designfile import read_design
from model.files.savefile import LockHeld, SaveError
from model.files.session import DesignSession

ROOT = pathlib.Path(__file__).resolve().parents[1]
GEOPHONE = ROOT / "saved_designs" / "geophone_preamp.toml"
VICTIM_BYTES = b"someone else's file: must not change\n"


def copy_demo(folder: pathlib.Path) -> pathlib.Path:
    path = folder / "design.toml"
    shutil.copyfile(GEOPHONE, path)
    return path


def stageledger(*args, **kwargs) -> subprocess.CompletedProcess:
    """The command as a user runs it: a new interpreter importing this tree."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    if "stdout" not in kwargs:
        kwargs["capture_output"] = True
    return subprocess.run([sys.executable, "-m", "tui", *map(str, args)], cwd=ROOT, env=env,
                          timeout=120, **kwargs)


def assert_one_line_refusal(proc: subprocess.CompletedProcess) -> str:
    err = proc.stderr.decode()
    assert proc.returncode == 2, err
    assert "Traceback" not in err
    assert len(err.splitlines()) == 1 and err.startswith("stageledger: "), err
    return err


# -- item 4: the lock file never follows a link -------------------------------------------------

def test_a_lock_file_that_links_to_another_file_is_refused_and_that_file_is_unchanged(tmp_path):
    path = copy_demo(tmp_path)
    victim = tmp_path / "victim.txt"
    victim.write_bytes(VICTIM_BYTES)
    lock = tmp_path / "design.toml.lock"
    lock.symlink_to(victim)
    before = path.read_bytes()
    proc = stageledger("set", path, "stage.rc=10k")
    err = assert_one_line_refusal(proc)
    assert str(lock) in err and "symbolic link" in err
    assert victim.read_bytes() == VICTIM_BYTES
    assert path.read_bytes() == before
    assert lock.is_symlink()  # left for the user to look at, not silently replaced


def test_a_dangling_lock_link_is_refused_and_its_target_not_created(tmp_path):
    path = copy_demo(tmp_path)
    target = tmp_path / "elsewhere" / "planted"
    (tmp_path / "elsewhere").mkdir()
    lock = tmp_path / "design.toml.lock"
    lock.symlink_to(target)
    proc = stageledger("set", path, "stage.rc=10k")
    err = assert_one_line_refusal(proc)
    assert str(lock) in err and "symbolic link" in err
    assert not os.path.lexists(target)


def test_a_lock_file_with_a_second_name_is_refused_and_the_other_name_unchanged(tmp_path):
    path = copy_demo(tmp_path)
    victim = tmp_path / "victim.txt"
    victim.write_bytes(VICTIM_BYTES)
    os.link(victim, tmp_path / "design.toml.lock")
    with pytest.raises(SaveError, match="hard link"):
        DesignSession(str(path))
    assert victim.read_bytes() == VICTIM_BYTES


def test_a_lock_path_that_is_a_fifo_is_refused_without_waiting(tmp_path):
    path = copy_demo(tmp_path)
    os.mkfifo(tmp_path / "design.toml.lock")
    proc = stageledger("set", path, "stage.rc=10k")  # the timeout fails the test if it blocks
    err = assert_one_line_refusal(proc)
    assert "not a regular file" in err


def test_a_plain_lock_file_still_works(tmp_path):
    path = copy_demo(tmp_path)
    assert stageledger("set", path, "stage.rc=10k").returncode == 0
    lock = tmp_path / "design.toml.lock"
    assert lock.is_file() and not lock.is_symlink()
    assert stageledger("set", path, "stage.rc=12k").returncode == 0  # the existing lock file is reused


# -- item 9: a holder that has not written its details yet --------------------------------------

def test_a_holder_that_has_not_written_its_details_is_named_as_starting(tmp_path):
    path = copy_demo(tmp_path)
    lock = tmp_path / "design.toml.lock"
    lock.write_bytes(b"")  # the holder has taken the flock but not written pid and host yet
    with open(lock, "rb") as held:
        fcntl.flock(held, fcntl.LOCK_EX | fcntl.LOCK_NB)
        with pytest.raises(LockHeld) as info:
            DesignSession(str(path))
        assert "another stageledger (starting)" in str(info.value)
        assert "?" not in str(info.value)
        err = assert_one_line_refusal(stageledger("set", path, "stage.rc=10k"))
        assert "another stageledger (starting)" in err and "pid ?" not in err


# -- item 6: control characters never reach the terminal raw ------------------------------------

#: Erase the display (ECMA-48 ED, section 8.3.29), ring the bell, and a newline.
HOSTILE = "a\x1b[2J b\x07 c\nd"
SHOWN = "a\\x1b[2J b\\x07 c\\nd"  # the same text as tui/safe_text.py `visible` writes it
#: Characters a terminal acts on (ECMA-48 C0 and C1 sets, and DEL); newline ends the output's own lines.
RAW_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f]")
TOML_HOSTILE = "a\\u001b[2J b\\u0007 c\\nd"  # HOSTILE written as a TOML basic string


def assert_shown_escaped(proc: subprocess.CompletedProcess, stream: str = "stdout") -> str:
    out, err = proc.stdout.decode(), proc.stderr.decode()
    for text in (out, err):
        found = RAW_CONTROL.search(text)
        assert found is None, repr(found.group())
    text = out if stream == "stdout" else err
    assert SHOWN in text, text
    return text


@pytest.fixture
def noted(tmp_path) -> pathlib.Path:
    """A design whose change notes and whose `notes` hold the hostile text, set from the command line."""
    path = copy_demo(tmp_path)
    assert stageledger("set", path, "stage.rc=10k", "--note", HOSTILE).returncode == 0
    assert stageledger("set", path, f"notes={HOSTILE}").returncode == 0
    return path


def test_set_shows_a_note_and_notes_escaped(tmp_path):
    path = copy_demo(tmp_path)
    assert_shown_escaped(stageledger("set", path, "stage.rc=10k", "--note", HOSTILE))
    assert_shown_escaped(stageledger("set", path, f"notes={HOSTILE}", "--dry-run"))
    assert_shown_escaped(stageledger("set", path, f"notes={HOSTILE}"))


def test_history_shows_notes_from_the_file_escaped(noted):
    # The notes are in the file as TOML escapes; read back they are the raw characters again.
    assert TOML_HOSTILE in noted.read_text(encoding="utf-8")
    out = assert_shown_escaped(stageledger("history", noted))
    assert f"note: {SHOWN}" in out


def test_diff_shows_a_changed_note_escaped(noted):
    assert_shown_escaped(stageledger("diff", f"{noted}@1", noted))


@pytest.mark.parametrize("body", [
    f'["st{TOML_HOSTILE}age"]\nrc = 1\n',          # a table name
    f'[stage]\n"r{TOML_HOSTILE}c" = 1\n',          # a key name in a table
    f'"n{TOML_HOSTILE}ame" = 1\n',                 # a key name at the top level
], ids=["table", "key", "top-level key"])
def test_unknown_names_in_a_file_are_refused_escaped_in_one_line(tmp_path, body):
    path = tmp_path / "design.toml"
    path.write_text("format = 1\n" + body, encoding="utf-8")
    for command in ("report", "history", "set"):
        args = (command, path, "stage.rc=10k") if command == "set" else (command, path)
        proc = stageledger(*args)
        assert_one_line_refusal(proc)
        assert_shown_escaped(proc, "stderr")


def test_unknown_key_and_bad_arguments_on_the_command_line_are_refused_escaped(tmp_path):
    path = copy_demo(tmp_path)
    for args in (("set", path, f"stage.r{HOSTILE}c=1"),
                 ("set", path, f"stage.rc=1{HOSTILE}"),
                 ("report", path, HOSTILE),          # argparse: "unrecognized arguments: ..."
                 ("history", path, "--json", HOSTILE)):
        proc = stageledger(*args)
        assert_one_line_refusal(proc)
        assert_shown_escaped(proc, "stderr")


def test_the_lock_holders_text_is_shown_escaped_on_one_line(tmp_path):
    path = copy_demo(tmp_path)
    lock = tmp_path / "design.toml.lock"
    # Whatever a lock file holds is only text: here a pid and host with ESC, BEL and a newline.
    lock.write_text(json.dumps({"pid": f"1{HOSTILE}", "host": f"h{HOSTILE}", "since": HOSTILE}), encoding="utf-8")
    with open(lock, "rb") as held:
        fcntl.flock(held, fcntl.LOCK_EX | fcntl.LOCK_NB)
        proc = stageledger("set", path, "stage.rc=10k")
    err = assert_one_line_refusal(proc)
    assert_shown_escaped(proc, "stderr")
    assert f"pid 1{SHOWN} on h{SHOWN}" in err


# -- item 7: where the output goes ---------------------------------------------------------------

@pytest.fixture(scope="module")
def long_history(tmp_path_factory) -> pathlib.Path:
    """A design whose `history` prints far more than a pipe holds (64 KiB on Linux, pipe(7))."""
    path = copy_demo(tmp_path_factory.mktemp("long"))
    with DesignSession(str(path)) as session:
        for n in range(60):
            session.commit({"stage.rc": f"{8200 + 10 * (n + 1)}"}, f"step {n}")
    return path


def test_a_reader_that_stops_after_one_line_is_no_error(long_history):
    """`stageledger history F | head -1`: status 0 and nothing on stderr, not even
    the interpreter's "Exception ignored" from its last flush."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    for args in (("history", long_history), ("history", long_history, "--json"), ("report", long_history)):
        proc = subprocess.Popen([sys.executable, "-m", "tui", *map(str, args)], cwd=ROOT, env=env,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        first = proc.stdout.readline()
        proc.stdout.close()  # as head does after its one line
        err = proc.stderr.read().decode()
        proc.stderr.close()
        assert proc.wait(timeout=120) == 0, err
        assert first and err == "", err


def test_a_full_disk_on_stdout_exits_2_with_one_line(long_history, tmp_path):
    """`> /dev/full`: every write fails with ENOSPC (the Linux full(4) device)."""
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full on this system")
    path = tmp_path / "design.toml"
    shutil.copyfile(long_history, path)
    for args in (("history", path), ("report", path), ("report", path, "--json"), ("--help",),
                 ("set", path, "stage.rc=10k")):
        with open("/dev/full", "wb") as full:
            proc = stageledger(*args, stdout=full, stderr=subprocess.PIPE)
        err = assert_one_line_refusal(proc)
        assert "could not be written" in err and "no space left" in err
    # The output failed, not the save: the change `set` made is on disk.
    assert read_design(path).stage.rc == 10e3  # "10k" is 10 kΩ exactly (IEC 60062 letter code)


# -- item 8: every valid file gets a report, every invalid one exit 2 in one line ---------------

def with_line(table: str, key: str, value: str) -> str:
    """The demo's text with ``table.key`` set to ``value`` (TOML), as a hand edit would write it."""
    head, rest = GEOPHONE.read_text(encoding="utf-8").split(f"[{table}]\n", 1)
    body, sep, tail = rest.partition("\n[")
    lines = [line for line in body.split("\n") if line.split(" = ")[0] != key]
    return f"{head}[{table}]\n{key} = {value}\n" + "\n".join(lines) + sep + tail


def assert_reported(proc: subprocess.CompletedProcess) -> None:
    """Exit 0 and nothing at all on stderr: no numpy warning, no traceback."""
    assert proc.returncode == 0, proc.stderr.decode()
    assert proc.stderr == b"", proc.stderr.decode()
    assert proc.stdout


@pytest.mark.parametrize("key, value", [("cin", "1e-30"), ("cout", "1e-30"), ("ce", "1e-30")])
def test_a_tiny_capacitor_still_gets_a_report_and_a_response(tmp_path, key, value):
    # 1e-30 F is valid (> 0): its corner lies far above any sweep, which once gave
    # "Number of samples, -219, must be non-negative" (exit 3).
    path = tmp_path / "design.toml"
    path.write_text(with_line("stage", key, value), encoding="utf-8")
    for command in ("report", "response"):
        assert_reported(stageledger(command, path))


@pytest.mark.parametrize("lines", [
    "a" + ".a" * 999 + " = 1\n",                     # a 1,000-part dotted key at the top level
    "[stage]\n" + "rc" + ".x" * 999 + " = 1\n",      # and inside a table
    "[[history]]\nafter" + ".x" * 999 + " = 1\n",    # and inside a history entry
], ids=["top", "table", "history"])
def test_a_thousand_level_dotted_key_is_refused_in_one_line(tmp_path, lines):
    path = tmp_path / "design.toml"
    path.write_text("format = 1\n" + lines, encoding="utf-8")
    before = path.read_bytes()
    for args in (("report", path), ("history", path), ("set", path, "stage.rc=10k")):
        err = assert_one_line_refusal(stageledger(*args))
        assert "nested" in err and "RecursionError" not in err
    assert path.read_bytes() == before


# (key, a value past the new bound, refused; the bound itself, accepted). The
# refused values are the ones that overflowed or underflowed numpy (warnings on
# stderr, or exit 3); the bounds are documented in README's key table.
BOUNDS = [
    ("transistor", "beta_r", "5e-324", "0.001"),
    ("transistor", "beta", "5e-324", "0.001"),
    ("transistor", "va", "5e-324", "0.001"),
    ("transistor", "i_s", "5e-324", "1e-30"),
    ("transistor", "ft", "5e-324", "1.0"),
    ("stage", "cin", "1e15", "1000.0"),
    ("stage", "cout", "1e15", "1000.0"),
    ("stage", "ce", "1e300", "1000.0"),
    ("stage", "rc", "1e300", "1e15"),
    ("source", "vpk", "1e300", "1000.0"),
]


@pytest.mark.parametrize("table, key, refused, accepted", BOUNDS, ids=[f"{t}.{k}" for t, k, *_ in BOUNDS])
def test_a_meaningless_value_is_refused_in_one_line_and_its_bound_reported(tmp_path, table, key, refused, accepted):
    path = tmp_path / "design.toml"
    path.write_text(with_line(table, key, refused), encoding="utf-8")
    err = assert_one_line_refusal(stageledger("report", path))
    assert f"{table}.{key}" in err and ("at least" in err or "at most" in err), err
    path.write_text(with_line(table, key, accepted), encoding="utf-8")
    proc = stageledger("report", path)
    # At the bound the design may have no operating point (a refusal in one
    # line, exit 2), but never a warning, a traceback or an internal error.
    if proc.returncode == 0:
        assert_reported(proc)
    else:
        assert_one_line_refusal(proc)


@pytest.mark.parametrize("topology, key, refused", [
    ("common-base", "stage.cin", "1e15"),               # once exit 3: a NaN phase at the corners
    ("emitter-follower-split", "bias.rb", "1e-300"),     # once exit 3 as well
])
def test_other_topologies_refuse_the_values_that_broke_them(tmp_path, topology, key, refused):
    path = tmp_path / "design.toml"
    assert stageledger("new", path, "--topology", topology).returncode == 0
    before = path.read_bytes()
    err = assert_one_line_refusal(stageledger("set", path, f"{key}={refused}"))
    assert key in err
    assert path.read_bytes() == before


# -- item 5: a design file that is a link, or read-only ------------------------------------------

def test_a_linked_design_is_saved_through_to_its_target_which_keeps_its_mode(tmp_path):
    real = tmp_path / "real"
    real.mkdir()
    target = copy_demo(real)
    target.chmod(0o640)  # not what the umask would give a new file (0o644 under the usual 022)
    link = tmp_path / "link.toml"
    link.symlink_to(target)
    proc = stageledger("set", link, "stage.rc=10k")
    assert proc.returncode == 0, proc.stderr.decode()
    assert link.is_symlink() and os.readlink(link) == str(target)
    assert read_design(target).stage.rc == 10e3  # "10k" is 10 kΩ exactly (IEC 60062 letter code)
    assert stat.S_IMODE(os.stat(target).st_mode) == 0o640
    # The save's temporaries were made beside the target and none is left, in either folder.
    assert [n for n in os.listdir(real) if n.endswith(".tmp")] == []
    assert [n for n in os.listdir(tmp_path) if n.endswith(".tmp")] == []
    # One lock for the design, whichever name it is opened by.
    assert (real / "design.toml.lock").is_file() and not (tmp_path / "link.toml.lock").exists()


def test_a_save_keeps_a_mode_the_umask_would_change(tmp_path):
    path = copy_demo(tmp_path)
    path.chmod(0o664)
    proc = stageledger("set", path, "stage.rc=10k", umask=0o022)  # which alone would make a new file 0o644
    assert proc.returncode == 0, proc.stderr.decode()
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o664


@pytest.mark.parametrize("via_link", [False, True], ids=["file", "link"])
def test_a_read_only_design_is_refused_and_left_as_it_was(tmp_path, via_link):
    # Tests run as root, whom no EACCES stops: the refusal must come from the mode bits.
    path = copy_demo(tmp_path)
    path.chmod(0o444)
    before = path.read_bytes()
    name = path
    if via_link:
        name = tmp_path / "link.toml"
        name.symlink_to(path)
    err = assert_one_line_refusal(stageledger("set", name, "stage.rc=10k"))
    assert "read-only" in err and "0444" in err
    assert path.read_bytes() == before
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o444
    assert [n for n in os.listdir(tmp_path) if n.endswith(".tmp")] == []
