"""Design files on disk: TOML text in, a validated Design and its history out.

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
from dataclasses import dataclass

import tomli_w

from model.design.stage import Design, design_from_dict, design_to_dict
from model.errors import DesignError, DesignFileError
from model.files.historyfile import history_from_list
from model.files.ledger import replay
from model.files.savefile import Fingerprint, SaveError

# A design is a few kilobytes and each history entry under one; the caps keep
# a wrong or hostile file from costing memory or time before the parser even
# sees it, while leaving room for tens of thousands of logged changes.
MAX_FILE_BYTES = 32 << 20
MAX_LINE_CHARS = 10_000
#: The deepest the parsed tables and arrays of a file may nest.  A design
#: needs at most about 7 ([[history]] → entry → design → tolerance → parts →
#: a dotted part key); the cap leaves room and keeps every check shallow.
MAX_NESTING = 16

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


@dataclass(frozen=True)
class Document:
    """A design file as read: the design, its history (a list of ledger
    Entries, empty for a file never edited by the tool), the fingerprint of the
    bytes read and the lines that hold hand-written comments."""

    path: str
    design: Design
    history: list
    fingerprint: Fingerprint
    comment_lines: tuple
    #: The design the history replays to (None without a history): read once,
    #: when the replay checks every entry's old values.
    logged: Design | None = None


def read_design(path: str | os.PathLike) -> Design:
    """The Design in the file at ``path``; DesignFileError or DesignError if it is not one."""
    return read_document(path).design


def read_document(path: str | os.PathLike) -> Document:
    """The whole design file at ``path``; DesignFileError or DesignError if it is not one."""
    name = os.fsdecode(path)
    raw = _read_bytes(name)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        line = raw.count(b"\n", 0, err.start) + 1
        bad = raw[err.start:err.start + 1].hex()
        raise DesignFileError(name, line, f"is not valid UTF-8 text (byte 0x{bad})") from None
    design, history = loads_document(text, name)
    return Document(name, design, history, Fingerprint.of(name, raw), comment_lines(text), _replayed(history, name))


def _replayed(history: list, path: str) -> Design | None:
    """The design ``history`` replays to; DesignError naming the file and the
    entry whose old values the entries before it do not leave."""
    if not history:
        return None
    try:
        return replay(history)
    except DesignError as err:
        raise err.in_file(path) from None


def _read_bytes(name: str) -> bytes:
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
    return raw


def _too_large() -> str:
    return f"is larger than {MAX_FILE_BYTES // 1024} KiB, far more than any design and its history"


def loads_design(text: str, path: str = "<string>") -> Design:
    """The Design in TOML ``text``; ``path`` names it in error messages."""
    return loads_document(text, path)[0]


def loads_document(text: str, path: str = "<string>") -> tuple:
    """(Design, history entries) from TOML ``text``; ``path`` names it in errors."""
    if len(text) > MAX_FILE_BYTES:
        raise DesignFileError(path, None, _too_large())
    if text.startswith(_BOM):
        raise DesignFileError(path, 1, "starts with a byte order mark; save it as UTF-8 without BOM")
    long_line = overlong_line(text)
    if long_line:
        raise DesignFileError(path, long_line[0], f"line is longer than {MAX_LINE_CHARS} characters")
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
    depth = _nesting(data)
    if depth > MAX_NESTING:
        # Legal TOML (a 1,000-part dotted key), but no design is built so:
        # refused here, before any check recurses into it or quotes it.
        raise DesignFileError(path, None, f"tables nested {depth} deep (a long dotted key?); "
                                          f"a design file needs at most {MAX_NESTING}")
    history = history_from_list(data.pop("history"), path) if "history" in data else []
    return design_from_dict(data, path), history


def overlong_line(text: str) -> tuple[int, int] | None:
    """(number from 1, length) of the first line of ``text`` longer than
    MAX_LINE_CHARS, or None: the one line rule, for the reader and the writer."""
    # TOML counts lines by "\n" only, so look for that alone.  From the start
    # of a line, the last newline within the next MAX_LINE_CHARS + 1
    # characters ends a run of lines short enough; none there, and the line
    # is too long.  So a long history is crossed in strides, not line by line.
    start, end = 0, len(text)
    while end - start > MAX_LINE_CHARS:
        newline = text.rfind("\n", start, start + MAX_LINE_CHARS + 1)
        if newline < 0:
            stop = text.find("\n", start)
            return text.count("\n", 0, start) + 1, (end if stop < 0 else stop) - start
        start = newline + 1
    return None


def _nesting(data) -> int:
    """How deeply tables and arrays nest in ``data``, counted without recursion."""
    deepest, stack = 0, [(data, 1)]
    while stack:
        node, depth = stack.pop()
        deepest = max(deepest, depth)
        children = node.values() if isinstance(node, dict) else node
        stack.extend((c, depth + 1) for c in children if isinstance(c, (dict, list)))
    return deepest


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


def dumps_document(design: Design, entry_texts: list) -> str:
    """The design followed by its history, given each entry's TOML text."""
    return dumps_design(design) + "".join("\n" + t for t in entry_texts)


def encode_for_save(text: str, path: str) -> bytes:
    """The UTF-8 bytes a save of ``text`` writes to ``path``, checked first
    against the reader's own limits: a save must never write a file that no
    command opens again.  SaveError names the field at fault, its size and
    the limit, and nothing is written."""
    try:
        data = text.encode("utf-8")
    except UnicodeEncodeError as err:
        field = _field_at(text, text.count("\n", 0, err.start) + 1)
        raise SaveError(path, f"{field} holds U+{ord(text[err.start]):04X}, which is not a character "
                              "(an undecodable byte on the command line?)") from None
    long_line = overlong_line(text)
    if long_line:
        number, length = long_line
        raise SaveError(path, f"{_field_at(text, number)} would be written as a line of {length:,} characters; "
                              f"a line of a design file holds at most {MAX_LINE_CHARS:,}: shorten it")
    if len(data) > MAX_FILE_BYTES:
        raise SaveError(path, f"the file would be {len(data):,} bytes; a design file holds at most "
                              f"{MAX_FILE_BYTES:,} ({MAX_FILE_BYTES >> 20} MiB): start a new file from this "
                              f"design with: stageledger new NEW --from {path}")
    return data


_HEADER = re.compile(r"(\[\[?)([A-Za-z0-9_.-]+)\]\]?")
_KEY = re.compile(r"\s*([A-Za-z0-9_-]+) = ")


def _field_at(text: str, number: int) -> str:
    """The key written on line ``number`` of ``text`` (as dumps_document lays
    it out: every value on its key's line), named as the reader's messages
    name it: ``notes``, ``history[3].note``, ``history[2].changes[1].new``."""
    lines = text.split("\n", number)
    shown, counts = "", {}
    for line in lines[:number - 1]:
        header = _HEADER.fullmatch(line)
        if not header:
            continue
        name = header.group(2)
        if header.group(1) == "[[":
            counts = {k: v for k, v in counts.items() if not k.startswith(name + ".")}
            counts[name] = counts.get(name, 0) + 1
        parts = name.split(".")
        shown = ".".join(f"{part}[{counts[p]}]" if (p := ".".join(parts[:i + 1])) in counts else part
                         for i, part in enumerate(parts))
    key = _KEY.match(lines[number - 1])
    key = key.group(1) if key else f"line {number}"
    return f"{shown}.{key}" if shown else key


def comment_lines(text: str) -> tuple:
    """Line numbers (from 1) that carry a ``#`` comment outside any string.

    A rewrite cannot keep them, so callers warn before a save would drop them.
    """
    lines, line, i, n = [], 1, 0, len(text)
    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
        elif ch == "#":
            lines.append(line)
            end = text.find("\n", i)
            i = n if end < 0 else end
            continue
        elif ch in "\"'":
            quote = text[i : i + 3] if text[i : i + 3] in ('"""', "'''") else ch
            j = i + len(quote)
            while j < n and text.startswith(quote, j) is False:
                if text[j] == "\\" and quote[0] == '"':
                    j += 1
                elif text[j] == "\n":
                    if len(quote) == 1:
                        break  # an unterminated one-line string: the parser will object
                    line += 1
                j += 1
            i = j + len(quote)
            continue
        i += 1
    return tuple(dict.fromkeys(lines))
