"""Design files on disk: TOML text in, a validated Design out.

A design file is something a person edits by hand or receives from someone
else, so reading it must never crash or hang: every failure becomes one
DesignFileError (cannot be read or parsed, with the line where known) or
DesignError (parsed, but a key breaks a rule).
"""

from __future__ import annotations

import errno
import os
import re
import stat
import tomllib

import tomli_w

from .design import Design, design_from_dict, design_to_dict
from .errors import DesignFileError

# A real design file is a few kilobytes; the caps keep a wrong or hostile
# file from costing memory or time before the parser even sees it.
MAX_FILE_BYTES = 1 << 20
MAX_LINE_CHARS = 10_000

_BOM = "\ufeff"
_WHERE = re.compile(r"\s*\(at line (\d+), column (\d+)\)$|\s*\(at end of document\)$")
# Python's int() refuses more than 4300 digits by default.
_LONG_NUMBER = re.compile(r"[0-9_]{4300,}")
_OS_REASONS = {
    errno.ENOENT: "no such file",
    errno.EACCES: "permission denied",
    errno.EPERM: "permission denied",
    errno.EISDIR: "is a directory, not a design file",
    errno.ENOTDIR: "a part of the path is not a directory",
    errno.ENAMETOOLONG: "the file name is too long",
    errno.ELOOP: "too many symbolic links in the path",
}


def _os_reason(err: OSError) -> str:
    return _OS_REASONS.get(err.errno) or f"cannot be read ({(err.strerror or 'unknown error').lower()})"


def read_design(path: str | os.PathLike) -> Design:
    """The Design in the file at ``path``; DesignFileError or DesignError if it is not one."""
    name = os.fsdecode(path)
    try:
        info = os.stat(name)
        # Reading a FIFO or device could block for ever or never end.
        if stat.S_ISDIR(info.st_mode):
            raise IsADirectoryError(errno.EISDIR, "is a directory")
        if not stat.S_ISREG(info.st_mode):
            raise DesignFileError(name, None, "is not a regular file")
        if info.st_size > MAX_FILE_BYTES:
            raise DesignFileError(name, None, _too_large())
        with open(name, "rb") as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
    except OSError as err:
        raise DesignFileError(name, None, _os_reason(err)) from None
    except ValueError:
        raise DesignFileError(name, None, "the file name contains a NUL character") from None
    if len(raw) > MAX_FILE_BYTES:
        raise DesignFileError(name, None, _too_large())
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        line = raw.count(b"\n", 0, err.start) + 1
        bad = raw[err.start:err.start + 1].hex()
        raise DesignFileError(name, line, f"is not valid UTF-8 text (byte 0x{bad})") from None
    return loads_design(text, name)


def _too_large() -> str:
    return f"is larger than {MAX_FILE_BYTES // 1024} KiB; a design file is a few kilobytes"


def loads_design(text: str, path: str = "<string>") -> Design:
    """The Design in TOML ``text``; ``path`` names it in error messages."""
    if len(text) > MAX_FILE_BYTES:
        raise DesignFileError(path, None, _too_large())
    if text.startswith(_BOM):
        raise DesignFileError(path, 1, "starts with a byte order mark; save it as UTF-8 without BOM")
    # TOML counts lines by "\n" only, so split the same way to report the same numbers.
    for number, line in enumerate(text.split("\n"), start=1):
        if len(line) > MAX_LINE_CHARS:
            raise DesignFileError(path, number, f"line is longer than {MAX_LINE_CHARS} characters")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise _decode_error(path, err) from None
    except RecursionError:
        raise DesignFileError(path, None, "not valid TOML: arrays or tables nested too deeply") from None
    except ValueError:
        # tomllib lets int() refuse a number with thousands of digits.
        long_number = _LONG_NUMBER.search(text)
        line = text.count("\n", 0, long_number.start()) + 1 if long_number else None
        raise DesignFileError(path, line, "not valid TOML: a number has too many digits") from None
    return design_from_dict(data, path)


def _decode_error(path: str, err: tomllib.TOMLDecodeError) -> DesignFileError:
    message = str(err.args[0]) if err.args else str(err)
    where = _WHERE.search(message)
    line = getattr(err, "lineno", None)
    column = getattr(err, "colno", None)
    if where and where.group(1):
        line, column = int(where.group(1)), int(where.group(2))
    reason = _WHERE.sub("", message)
    reason = reason[0].lower() + reason[1:] if reason else "unreadable"
    at = f" (column {column})" if column else ""
    if where and not where.group(1):
        # tomllib notices some mistakes (a key given twice) only at the end.
        line, at = None, " (noticed at the end of the file)"
    return DesignFileError(path, line, f"not valid TOML: {reason}{at}")


def dumps_design(design: Design) -> str:
    """``design`` as the TOML text of a design file."""
    return tomli_w.dumps(design_to_dict(design))
