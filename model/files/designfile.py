"""Design files on disk: TOML text in, a validated Design and its history out.

A design file is something a person edits by hand or receives from someone
else, so reading it must never crash or hang: every failure becomes one
DesignFileError (cannot be read or parsed, with the line where known) or
DesignError (parsed, but a key breaks a rule).
"""

from __future__ import annotations

import errno
import functools
import os
import re
import stat
import tomllib
from dataclasses import dataclass, field

import tomli_w

from model.design.stage import Design, design_from_dict, design_to_dict
from model.errors import DesignError, DesignFileError, StageledgerError
from model.files.historyfile import _short, entry_text, history_from_list
from model.files.historytext import (
    DIGEST_TABLE,
    digest_text,
    quick_entries,
    quick_entry,
    quick_steps,
    verified_split,
)
from model.files.ledger import Entry, changes_between, replay
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
    """A design file as read: the design, its history, the fingerprint of the
    bytes read and the lines that hold hand-written comments.

    The history is ``entry_count`` entries long.  A file whose digest
    matched keeps it as the text it was read from (``verified_text``), and
    :attr:`history` reads the Entries from it only when asked; one that had
    the full check keeps the Entries it read (``checked_entries``).
    ``logged`` is the design the history replays to (None without a
    history): found once, by the full check or from the digest.
    """

    path: str
    design: Design
    entry_count: int
    fingerprint: Fingerprint
    comment_lines: tuple
    logged: Design | None = None
    verified_text: str | None = field(default=None, repr=False)
    checked_entries: list | None = field(default=None, repr=False)

    @functools.cached_property
    def history(self) -> list:
        """The ledger Entries (empty for a file never edited by the tool)."""
        if self.checked_entries is not None:
            return self.checked_entries
        return quick_entries(self.verified_text) if self.verified_text else []

    def steps(self) -> list:
        """Each entry's number, action and what it reverses (all that
        ledger.stacks reads), without reading a verified history whole."""
        if self.checked_entries is not None or "history" in self.__dict__ or not self.verified_text:
            return list(self.history)
        return quick_steps(self.verified_text)

    def entry(self, number: int) -> Entry:
        """History entry ``number`` (from 1), read alone from a verified history."""
        if self.checked_entries is not None or "history" in self.__dict__:
            return self.history[number - 1]
        return quick_entry(self.verified_text, number, self.entry_count)

    def hand_edits(self) -> tuple:
        """The changes made to the file by hand since its last logged entry;
        StageledgerError for a topology changed by hand, which the ledger
        cannot log key by key."""
        if not self.entry_count:
            return ()
        logged = self.logged
        if logged.topology != self.design.topology:
            # Key-by-key changes cannot express a new topology (its keys differ),
            # and logging them would leave a history that no longer replays.
            raise StageledgerError(
                f"{self.path}: topology changed by hand from {logged.topology} to "
                f"{self.design.topology} since the last history entry, which the ledger "
                f"cannot log; start a new file from it with: stageledger new NEW --from {self.path}")
        return changes_between(logged, self.design)

    @functools.cached_property
    def history_text(self) -> str:
        """The entries' TOML, one after another with a blank line between, as
        :func:`dumps_document` writes them: the file's own text where it was
        verified, so that a save need not write the old entries anew."""
        if self.verified_text is not None:
            return self.verified_text
        return "\n".join(entry_text(e) for e in self.history)


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
    fingerprint = Fingerprint.of(name, raw)
    _check_lines(text, name)
    verified = verified_split(raw, text)
    if verified is not None:
        # What the tool wrote, after checking it: no replay, and no comments.
        design_text, history_text, count = verified
        design = design_from_dict(_parsed(design_text, name), name)
        return Document(name, design, count, fingerprint, (), design, verified_text=history_text)
    design, history = loads_document(text, name)
    return Document(name, design, len(history), fingerprint, comment_lines(text), _replayed(history, name),
                    checked_entries=history)


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
    _check_lines(text, path)
    data = _parsed(text, path)
    if DIGEST_TABLE in data:
        _check_digest_table(data.pop(DIGEST_TABLE), path)
    history = history_from_list(data.pop("history"), path) if "history" in data else []
    return design_from_dict(data, path), history


def _check_lines(text: str, path: str) -> None:
    if text.startswith(_BOM):
        raise DesignFileError(path, 1, "starts with a byte order mark; save it as UTF-8 without BOM")
    long_line = overlong_line(text)
    if long_line:
        raise DesignFileError(path, long_line[0], f"line is longer than {MAX_LINE_CHARS} characters")


def _check_digest_table(table, path: str) -> None:
    """Refuse a ``ledger_digest`` that is not one.  A digest that does not
    match is no error: the file was edited by hand, and has had the full check."""
    if not isinstance(table, dict) or set(table) - {"entries", "sha256"}:
        raise DesignError(DIGEST_TABLE, _short(table), "must hold only entries and sha256, as stageledger writes "
                          "it (delete the table: the next save writes it anew)").in_file(path)


def _parsed(text: str, path: str) -> dict:
    """The TOML ``text`` parsed, DesignFileError for text that is not TOML or nests too deeply."""
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
    return data


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


def dumps_checked_document(design: Design, entry_texts: list, entries: int | None = None) -> str:
    """:func:`dumps_document` ended by the digest that spares the next read
    the full check, so only for a history checked (or made) by the tool and
    the design it replays to; ``entries`` counts the entries where one text
    holds several (a history read back whole)."""
    body = dumps_document(design, entry_texts)
    count = len(entry_texts) if entries is None else entries
    return body + digest_text(body, count) if count else body


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
