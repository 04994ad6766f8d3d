"""Hostile files and hostile surroundings (issue 16): what is planted beside a
design, what its text holds, and where the output goes.

Every check looks at what is on disk (bytes, whether a file exists) or at the
bytes a real subprocess wrote, never at the tool's own account of it.
"""

from __future__ import annotations

import fcntl
import os
import pathlib
import shutil
import subprocess
import sys

import pytest

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
    kwargs.setdefault("capture_output", True)
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
