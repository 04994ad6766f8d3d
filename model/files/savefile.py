"""Saving a design file safely, and letting only one writer at a time.

The promise: a user who loses the link, is killed or fills the disk loses at
most the change in flight, and a file that was changed by someone else since
it was read is never overwritten.

* A save writes a temporary file beside the target (same directory, so the
  rename cannot cross file systems), fsyncs it, renames it over the target
  with ``os.replace`` and then fsyncs the directory, because a rename is not
  durable until its directory is.  Only then is the change reported saved.
* Any OSError means "not saved": the temporary file is removed and the
  original is untouched.  A failed fsync is never retried on the same
  descriptor (Linux may report success the second time after losing the
  data); the next save writes a fresh temporary file.
* One writer: an exclusive ``flock`` on a sidecar ``<file>.lock``, never on
  the data file itself, whose inode each save replaces.  The kernel drops the
  lock when its holder dies, so a killed process leaves no stale lock; the
  temporary it may leave is removed by the next writer to take the lock.
"""

from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import re
import secrets
import socket
import stat
import time
from dataclasses import dataclass

from model.errors import StageledgerError
from model.files import plain_json


class SaveError(StageledgerError):
    """A save that did not happen; the file on disk is as it was."""

    def __init__(self, path: str, reason: str):
        self.path = path
        self.reason = reason
        super().__init__(f"{path}: not saved: {reason}")


class LockHeld(StageledgerError):
    """Another process is editing the design."""

    def __init__(self, path: str, holder: dict):
        self.path = path
        self.holder = holder
        super().__init__(f"{path}: being edited by {_holder_text(holder)}; open it read-only, or wait")


def _holder_text(holder: dict) -> str:
    """Who holds the lock, from the details it wrote; the text is the file's
    own (callers that print it escape it, as they do all file text)."""
    if "pid" not in holder:
        # The holder takes the flock first and writes its details just after.
        return "another stageledger (starting)"
    where = f" on {holder['host']}" if "host" in holder else ""
    since = f" since {holder['since']}" if holder.get("since") else ""
    return f"pid {holder['pid']}{where}{since}"


@dataclass(frozen=True)
class Fingerprint:
    """What a file was when it was read: size (bytes), mtime (ns), SHA-256
    of the bytes read and inode (mtime and inode 0 where they could not be
    had: then only size and hash decide)."""

    size: int
    mtime_ns: int
    sha256: str
    inode: int = 0

    @staticmethod
    def of(path: str, data: bytes) -> "Fingerprint":
        try:
            info = os.stat(path)
            mtime, inode = info.st_mtime_ns, info.st_ino
        except OSError:
            mtime = inode = 0
        return Fingerprint(len(data), mtime, hashlib.sha256(data).hexdigest(), inode)

    def describes(self, info: os.stat_result, size: int, sha256: str) -> bool:
        """Whether a file with status ``info``, whose ``size`` bytes read hash
        to ``sha256``, is still the one read."""
        return (size == self.size == info.st_size and sha256 == self.sha256
                and self.mtime_ns in (0, info.st_mtime_ns) and self.inode in (0, info.st_ino))


def _reason(err: OSError) -> str:
    names = {
        errno.ENOSPC: "the disk is full",
        errno.EDQUOT: "the disk quota is exhausted",
        errno.EROFS: "the file system is read-only",
        errno.EACCES: "permission denied",
        errno.EPERM: "permission denied",
        errno.EIO: "an input/output error",
        errno.ENOENT: "the folder no longer exists",
    }
    return names.get(err.errno) or (err.strerror or "unknown error").lower()


def unchanged_since(path: str, seen: Fingerprint | None) -> bool:
    """Whether ``path`` is still what ``seen`` describes (absent if ``seen`` is None).

    Every part must agree: the hash catches an edit of the same size within
    one mtime tick, the inode an editor's own rename, the mtime and size the
    rest.  The status is taken after the read, so that a write during the
    read moves the mtime the check then sees."""
    try:
        with open(path, "rb") as handle:
            data = handle.read(seen.size + 1 if seen is not None else 1)
            read_inode = os.fstat(handle.fileno()).st_ino
        digest = hashlib.sha256(data).hexdigest()
        info = os.stat(path)  # the last look at the file: a save's rename follows at once
    except FileNotFoundError:
        return seen is None
    if seen is None:
        return False
    # The name must still lead to the inode read (an editor may rename a new file over it meanwhile).
    return info.st_ino == read_inode and seen.describes(info, len(data), digest)


def atomic_write(path: str, data: bytes, seen: Fingerprint | None, *, create: bool = False) -> Fingerprint:
    """Replace ``path`` with ``data`` durably; returns the new fingerprint.

    ``seen`` is the fingerprint taken when the file was read; if the file has
    changed since, nothing is written.  With ``create`` the file must not
    exist yet.  Raises SaveError, leaving the original byte-identical.

    A symbolic link is written through: the link's target gets the new
    bytes (the temporary is made in the target's folder, so the rename stays
    on its file system) and the link stays a link.  The file keeps its mode
    and, where the process may set it, its owner; a file without its owner's
    write bit (mode 444) is refused rather than replaced.
    """
    if create:
        if os.path.lexists(path):
            raise SaveError(path, "the file already exists; choose another name")
        target, info = os.path.abspath(path), None
    else:
        target = os.path.realpath(path)
        _refuse_changed(path, target, seen)
        try:
            info = os.stat(target)
        except FileNotFoundError:
            info = None  # gone since it was read: unchanged_since allowed that only for seen=None
        except OSError as err:
            raise SaveError(path, _reason(err)) from None
        if info is not None:
            _refuse_unwritable(path, target, info)
    folder = os.path.dirname(target)
    mode = 0o666 if info is None else info.st_mode & 0o7777
    tmp = _temp_name(target)
    fd = backup = None
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, mode)
        if info is not None:
            _keep_owner_and_mode(fd, info)
        view = memoryview(data)
        while view:
            written = os.write(fd, view)
            view = view[written:]
        os.fsync(fd)
        fd, closing = None, fd
        os.close(closing)  # never closed twice, even if this raises
        if create and os.path.lexists(path):
            raise SaveError(path, "the file appeared while saving; choose another name")
        if not create:
            # A second name for the original, so that it can be put back if the
            # rename cannot be made durable: a SaveError promises the file as it was.
            backup = _temp_name(target)
            try:
                os.link(target, backup, follow_symlinks=False)
            except OSError:
                backup = None  # a file system without hard links: no way back, as before
        # The last look, as late as it can be: a hand edit made while the
        # temporary was written and synced is kept, and this save refused.
        # What remains is the time from the stat in unchanged_since to the
        # rename (README, Saving safely).
        if not create:
            _refuse_changed(path, target, seen)
        os.replace(tmp, target)
        tmp = None
        try:
            _fsync_dir(folder)
        except OSError:
            if create:
                os.unlink(target)
            elif backup is not None:
                os.replace(backup, target)
                backup = None
            raise
    except OSError as err:
        raise SaveError(path, _reason(err)) from None
    finally:
        if fd is not None:
            try:
                os.close(fd)
            except OSError:
                pass
        for leftover in (tmp, backup):
            if leftover is not None:
                try:
                    os.unlink(leftover)
                except OSError:
                    pass
    return Fingerprint.of(path, data)


def _refuse_changed(path: str, target: str, seen: Fingerprint | None) -> None:
    try:
        unchanged = unchanged_since(target, seen)
    except OSError as err:
        raise SaveError(path, f"cannot check the file before saving: {_reason(err)}") from None
    if not unchanged:
        raise SaveError(path, "the file changed on disk since it was read; "
                              "reload it, or save your change to another file")


def _refuse_unwritable(path: str, target: str, info: os.stat_result) -> None:
    """SaveError if the file may not be written, though a rename could still
    replace it: the rename needs only the folder's permission, and root's
    needs none, so the mode bits are checked, not left to an EACCES."""
    if not info.st_mode & stat.S_IWUSR:
        raise SaveError(path, f"the file is read-only (mode {info.st_mode & 0o7777:04o}); "
                              "make it writable (chmod u+w) to save to it, or save to another file")
    if not os.access(target, os.W_OK):
        try:
            read_only_fs = bool(os.statvfs(os.path.dirname(target)).f_flag & os.ST_RDONLY)
        except OSError:
            read_only_fs = False
        raise SaveError(path, "the file system is read-only" if read_only_fs else
                              "permission denied: the file is not writable by you; save to another file")


def _keep_owner_and_mode(fd: int, info: os.stat_result) -> None:
    """Give the temporary the original's owner and exact mode (``os.open``'s
    mode passes through the umask, so a 664 file would come back 644)."""
    if (info.st_uid, info.st_gid) != (os.geteuid(), os.getegid()):
        try:
            os.fchown(fd, info.st_uid, info.st_gid)
        except PermissionError:
            pass  # only root may give a file away: it becomes ours, as with any editor
    os.fchmod(fd, info.st_mode & 0o7777)  # after fchown, which may clear set-id bits


def _temp_name(path: str) -> str:
    folder, base = os.path.split(os.path.abspath(path))
    return os.path.join(folder, f".{base}.{os.getpid()}.{secrets.token_hex(4)}.tmp")


def _remove_stale_temps(path: str) -> None:
    """Delete temporaries of ``path`` left by a writer killed mid-save.

    Called with the edit lock held: every writer takes it, so no other save
    of this file can be in progress and any temporary found is stale.
    """
    folder, base = os.path.split(os.path.abspath(path))
    pattern = re.compile(rf"\.{re.escape(base)}\.\d+\.[0-9a-f]{{8}}\.tmp")
    try:
        names = os.listdir(folder)
    except OSError:
        return
    for name in names:
        if pattern.fullmatch(name):
            try:
                os.unlink(os.path.join(folder, name))
            except OSError:
                pass  # tidying up is a courtesy; the design file is never at stake


def _fsync_dir(folder: str) -> None:
    fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def lock_path(path: str) -> str:
    return os.fspath(path) + ".lock"


class DesignLock:
    """An exclusive edit lock on a design file (a context manager).

    The sidecar lock file holds the holder's pid, host and start time so a
    second instance can say who has the design.  It is never deleted:
    deleting it would let two writers lock two different inodes.
    """

    def __init__(self, path: str):
        self.path = os.fspath(path)
        # Beside the file itself, not a link to it: every name of one design
        # shares one lock, and the saves' temporaries are in the same folder.
        self._target = os.path.realpath(self.path)
        self._fd: int | None = None

    def acquire(self) -> "DesignLock":
        name = lock_path(self._target)
        fd = _open_lock_file(self.path, name)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = _read_holder(fd)
            os.close(fd)
            raise LockHeld(self.path, holder) from None
        except OSError as err:
            os.close(fd)
            raise SaveError(self.path, f"cannot lock {name}: {_reason(err)}") from None
        stamp = plain_json.dumps({"pid": os.getpid(), "host": socket.gethostname(),
                            "since": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}, indent=None)
        try:
            os.ftruncate(fd, 0)
            os.pwrite(fd, stamp.encode() + b"\n", 0)
        except OSError:
            pass  # who holds the lock is a courtesy; the flock itself is what protects
        self._fd = fd
        _remove_stale_temps(self._target)
        return self

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing the descriptor drops the flock
            self._fd = None

    def __enter__(self) -> "DesignLock":
        return self.acquire()

    def __exit__(self, *exc) -> None:
        self.release()


def _open_lock_file(path: str, name: str) -> int:
    """A descriptor on the lock file ``name`` of ``path``, created if missing.

    The lock file is truncated and rewritten, so a symbolic link or a second
    hard link planted at its name would let that write land on another file
    (or create one where a dangling link points).  ``O_NOFOLLOW`` refuses a
    link as the last component, ``O_NONBLOCK`` keeps a FIFO planted there from
    blocking the open, and the check on the descriptor (not the name, which
    could be swapped in between) refuses anything but a regular file with
    one name.
    """
    flags = os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW | os.O_CLOEXEC | os.O_NONBLOCK
    try:
        # Checked before opening too, so that no device planted there is ever opened.
        mode = os.lstat(name).st_mode
        if stat.S_ISLNK(mode):
            raise SaveError(path, _not_plain(name, "is a symbolic link"))
        if not stat.S_ISREG(mode):
            raise SaveError(path, _not_plain(name, "is not a regular file"))
    except FileNotFoundError:
        pass
    except OSError as err:
        raise SaveError(path, f"cannot check the lock file {name}: {_reason(err)}") from None
    try:
        fd = os.open(name, flags, 0o666)
    except OSError as err:
        if err.errno == errno.ELOOP:  # a link put there since the check
            raise SaveError(path, _not_plain(name, "is a symbolic link")) from None
        raise SaveError(path, f"cannot create the lock file {name}: {_reason(err)}") from None
    info = os.fstat(fd)
    problem = None
    if not stat.S_ISREG(info.st_mode):
        problem = "is not a regular file"
    elif info.st_nlink > 1:
        problem = "has another name (a hard link), so writing it would change another file"
    if problem:
        os.close(fd)
        raise SaveError(path, _not_plain(name, problem))
    return fd


def _not_plain(name: str, problem: str) -> str:
    return f"the lock file {name} {problem}; remove it, and the next command makes a plain one"


def _read_holder(fd: int) -> dict:
    try:
        text = os.pread(fd, 4096, 0).decode("utf-8", "replace").strip()
        holder = json.loads(text) if text else {}
        return holder if isinstance(holder, dict) else {}
    except (OSError, ValueError):
        return {}
