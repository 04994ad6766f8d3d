"""The history as text: the digest that spares a long history's full check,
and a quick reader of the entries this tool writes.

Reading a design file checks every history entry (its fields, and the
replay of every change against the old values it records), which at 10,000
entries costs seconds, most of it TOML parsing.  So every save ends the
file with a digest of everything above it::

    [ledger_digest]
    entries = 10000
    sha256 = "…"

When the digest matches the bytes above it, those bytes are exactly what
stageledger wrote after checking them, so the reader takes the design from
the top of the file and leaves the history as text, to be read only if a
command needs its entries (and then by :func:`quick_entries`, without
checking again).  Any other file (no digest, a hand edit anywhere above it,
damage) gets the full check.  The digest is a checksum, not a signature:
it catches edits and damage, not someone who recomputes it on purpose
(who could as well write a consistent history by hand).
"""

from __future__ import annotations

import datetime as _dt
import functools
import hashlib
import json
import re
import tomllib
from typing import NamedTuple

from model.files.ledger import HEADLINE, Change, Entry

DIGEST_TABLE = "ledger_digest"
#: Where each entry starts in the text the writer produces.
ENTRY_HEADER = "\n[[history]]\n"
_TAIL = re.compile(rb'\n\[ledger_digest\]\nentries = ([1-9][0-9]{0,8})\nsha256 = "([0-9a-f]{64})"\n\Z')


def digest_text(body: str, entries: int) -> str:
    """The digest table that ends a file whose text above it is ``body``."""
    # "surrogatepass": a lone surrogate (an undecodable byte from the command
    # line) must reach encode_for_save, which refuses the save naming its field.
    sha = hashlib.sha256(body.encode("utf-8", "surrogatepass")).hexdigest()
    return f'\n[{DIGEST_TABLE}]\nentries = {entries}\nsha256 = "{sha}"\n'


def verified_split(raw: bytes, text: str) -> tuple[str, str, int] | None:
    """(design text, history text, entry count) of a file whose digest
    matches (``text``: ``raw`` decoded), the history text starting with its
    first entry's header; None for any file whose digest is missing or does
    not match."""
    marker = f"\n[{DIGEST_TABLE}]\n"
    start = raw.rfind(marker.encode())
    tail = _TAIL.fullmatch(raw, start) if start >= 0 else None
    # A view, not a copy: the bytes above the digest are most of the file.
    if tail is None or hashlib.sha256(memoryview(raw)[:start]).hexdigest() != tail.group(2).decode():
        return None
    # UTF-8 never makes an ASCII byte inside a character, so the last marker
    # in the text is the one in the bytes.
    end = text.rfind(marker)
    entries = int(tail.group(1))
    # The writer escapes every newline inside a string, so each header line is an entry's.
    first = text.find(ENTRY_HEADER, 0, end)
    if first < 0 or text.count(ENTRY_HEADER, 0, end) != entries:
        return None
    return text[:first + 1], text[first + 1:end], entries


def quick_entries(history_text: str) -> list:
    """The Entries of a verified history text (see :func:`verified_split`)."""
    return [_entry(_parse_chunk(chunk)) for chunk in _chunks(history_text)]


class Step(NamedTuple):
    """What undo and redo need of an entry (see ledger.stacks)."""

    number: int
    action: str
    reverses: int | None


def quick_steps(history_text: str) -> list:
    """The Steps of a verified history text, from the lines above each
    entry's figures: undo needs no more of the entries it does not reverse."""
    steps = []
    for chunk in _chunks(history_text):
        match = _STEP.match(chunk)
        if match:
            number, action, reverses = match.groups()
            steps.append(Step(int(number), action, None if reverses is None else int(reverses)))
        else:
            table = _parse_chunk(chunk)
            steps.append(Step(table["entry"], table["action"], table.get("reverses")))
    return steps


# The first lines of an entry as the writer orders them (entry_to_dict).
_STEP = re.compile(r'entry = ([1-9][0-9]*)\ntime = [^\n]*\naction = "([a-z-]+)"\n(?:from = [^\n]*\n)?'
                   r"(?:reverses = ([1-9][0-9]*)\n)?(?!reverses = )")


def quick_entry(history_text: str, number: int, count: int) -> Entry:
    """Entry ``number`` (from 1) of a verified history text of ``count``
    entries; the last, which every commit reads, without splitting the rest."""
    if number == count:
        # The first entry's header starts the text, without the newline before it.
        last = history_text.rfind(ENTRY_HEADER)
        chunk = history_text[last + len(ENTRY_HEADER):] if last >= 0 else history_text.removeprefix(ENTRY_HEADER[1:])
    else:
        chunk = _chunks(history_text)[number - 1]
    return _entry(_parse_chunk(chunk))


def _chunks(history_text: str) -> list:
    return ("\n" + history_text).split(ENTRY_HEADER)[1:]


def _entry(d: dict) -> Entry:
    """An Entry from the table of one already checked entry."""
    return Entry(
        number=d["entry"], time=d["time"].astimezone(_dt.timezone.utc), action=d["action"],
        changes=tuple(Change(c["key"], c["old"], c["new"]) for c in d.get("changes", ())),
        note=d.get("note", ""), before=d.get("before", {}), after=d["after"],
        raised=tuple(d.get("raised", ())), cleared=tuple(d.get("cleared", ())),
        reverses=d.get("reverses"), origin=d.get("from"), snapshot=d.get("design"),
    )


class _NotQuick(Exception):
    """A line outside the few shapes the quick reader knows."""


def _parse_chunk(chunk: str) -> dict:
    """One entry's table; the quick reader knows the writer's usual lines
    and hands anything else (a start entry's design, a long change written
    as a table) to the TOML parser."""
    try:
        return _quick_chunk(chunk)
    except _NotQuick:
        return tomllib.loads("[[history]]\n" + chunk)["history"][0]


#: Reads a raw tab in a string, as TOML does.
_JSON = json.JSONDecoder(strict=False)
_SECTIONS = {"history.before": "before", "history.after": "after"}
_CHANGE = re.compile(r'    \{ key = ("[^"\\]*"), old = ([^,{}\[\]]+), new = ([^,{}\[\]]+) \},')
_ITEM = re.compile(r'    ("[^"\\]*"),')
# A TOML decimal int or float, which Python's int and float read alike.
_NUMBER = re.compile(r"-?(?:0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?")
#: A character no figures table of the writer's holds: with none of them
#: (no comma, colon, bracket, brace, backslash, tab, capital but the
#: exponent's E), the JSON text made of a figures table can only be an object of
#: one name and one number, string, true or false per line (null is looked
#: for apart), each of which TOML reads alike.
_NOT_FIGURES = re.compile(r'[^a-z0-9_ =.+\-"\nE]')
#: The names a figures table may have: bare keys, so TOML reads them as JSON does.
_FIGURE_NAMES = frozenset(HEADLINE)
_TIME = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2} [0-9]{2}:[0-9]{2}:[0-9]{2}(?:\.[0-9]{1,6})?(?:Z|[+-][0-9]{2}:[0-9]{2})")
# The escapes the writer uses (TOML's, minus \U and surrogates), which JSON reads alike.
_STRING = re.compile(r'"(?:[^"\\\x00-\x08\x0a-\x1f\x7f]|\\["\\bfnrt]|\\u(?![dD][89abAB])[0-9a-fA-F]{4})*"')


def _quick_chunk(chunk: str) -> dict:
    # Strings never hold a raw newline, so a blank line and "[" start a table.
    head, *sections = chunk.split("\n\n[")
    table = _head(head)
    for section in sections:
        name, _, body = section.partition("]\n")
        key = _SECTIONS.get(name)
        if key is None or key in table:
            raise _NotQuick
        table[key] = _figures(body)
    return table


def _head(text: str) -> dict:
    table: dict = {}
    lines = iter(text.split("\n"))
    for line in lines:
        key, _, value = line.partition(" = ")
        # An ASCII identifier is a bare key that TOML reads as itself.
        if not (value and key.isascii() and key.isidentifier()) or key in table:
            raise _NotQuick
        table[key] = _array(lines, key) if value == "[" else _scalar(value)
    return table


def _figures(text: str) -> dict:
    """A table of figures, one ``name = number`` (or region) a line: the
    bulk of every entry, read by the JSON reader, whose numbers are TOML's."""
    # Without its trailing newline (an entry's last table has one, the others
    # not), an entry's figures before are the text of the entry above's after.
    # A copy: the tables remembered are shared, an Entry's are its own.
    return dict(_remembered_figures(text.rstrip("\n")))


@functools.lru_cache(maxsize=256)
def _remembered_figures(text: str) -> dict:
    """_figures of a text without trailing newlines; remembered, since an
    entry's figures before are the ones after the entry above it, and a
    history comes back to the same designs."""
    if _NOT_FIGURES.search(text) or "null" in text:
        raise _NotQuick
    try:
        table = _JSON.decode('{"' + text.replace(" = ", '": ').replace("\n", ', "') + "}")
    except ValueError:  # not JSON either: a value TOML has and JSON has not (inf, nan), or no table
        raise _NotQuick from None
    # Fewer names than lines: a name given twice, which TOML refuses.
    if len(table) != text.count("\n") + 1 or not table.keys() <= _FIGURE_NAMES:
        raise _NotQuick
    return table


def _array(lines, key: str) -> list:
    items = []
    for line in lines:
        if line == "]":
            return items
        if key == "changes" and (m := _CHANGE.fullmatch(line)):
            items.append({"key": _scalar(m.group(1)), "old": _scalar(m.group(2)), "new": _scalar(m.group(3))})
        elif key != "changes" and (m := _ITEM.fullmatch(line)):
            items.append(_scalar(m.group(1)))
        else:
            raise _NotQuick
    raise _NotQuick


def _scalar(text: str):
    if text.startswith('"'):
        inner = text[1:-1]
        # The usual string first: no escape, no quote, no control character.
        if len(text) > 1 and text.endswith('"') and inner.isprintable() and '"' not in inner and "\\" not in inner:
            return inner
        if not _STRING.fullmatch(text):
            raise _NotQuick
        return text[1:-1] if "\\" not in text else _JSON.decode(text)
    if text.isdigit() and text.isascii() and (text[0] != "0" or text == "0"):
        return int(text)  # the usual int: plain digits, as TOML reads them
    if ":" in text:  # of all the values, a time alone has a colon
        if _TIME.fullmatch(text):
            return _dt.datetime.fromisoformat(text)
        raise _NotQuick
    try:  # the usual float: its repr, as the writer writes it, which TOML reads as the same float
        if repr(number := float(text)) == text:
            return number
    except ValueError:
        pass
    number = _NUMBER.fullmatch(text)
    if number:
        return float(text) if number.group(1) or number.group(2) else int(text)
    if text in ("inf", "-inf", "+inf"):
        return float(text)
    raise _NotQuick
