"""Long histories: the digest that spares the full check, the quick reader
of entries, and loading that grows linearly with the history.

Every fast path is compared with the full one it replaces (the same
design, Entries and written bytes), every way around it (a hand edit above
the digest, a wrong digest, a digest table that is not one) is shown to
fall back to the full check, which still refuses what item 3 refuses; and
linear growth is asserted on counted function calls, not on times, so the
test cannot fail by chance on a busy machine.
"""

from __future__ import annotations

import cProfile
import dataclasses
import datetime as dt
import hashlib
import pathlib
import pstats
import re
import sys
import tomllib

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from model.analyses.checks import CODES
from model.design.stage import CE, EF, default_design
from model.errors import DesignError
from model.files import designfile, historyfile, historytext, ledger
from model.files.designfile import read_document
from model.files.historyfile import entry_text, history_from_list
from model.files.historytext import quick_entries
from model.files.session import DesignSession, create, design_at

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent / "bench"))

from long_history import write_long_file  # noqa: E402

_DIGEST = re.compile(r'\n\[ledger_digest\]\nentries = \d+\nsha256 = "[0-9a-f]{64}"\n\Z')


def without_digest(path: pathlib.Path, name: str) -> pathlib.Path:
    """A copy of ``path`` as a version of the tool without the digest wrote it."""
    copy = path.with_name(name)
    copy.write_text(_DIGEST.sub("\n", path.read_text(encoding="utf-8")), encoding="utf-8")
    return copy


class Calls:
    """Counts the calls of one module function, still calling it."""

    def __init__(self, monkeypatch, module, name: str):
        self.count = 0
        real = getattr(module, name)

        def counted(*args, **kw):
            self.count += 1
            return real(*args, **kw)

        monkeypatch.setattr(module, name, counted)


@pytest.fixture(scope="module")
def long_file(tmp_path_factory) -> pathlib.Path:
    """6,000 entries of sets, undos and redos with notes, as the tool saves them."""
    return write_long_file(tmp_path_factory.mktemp("long") / "long.toml", 6_000)


def edited(path: pathlib.Path, name: str, old: str, new: str, at: int) -> pathlib.Path:
    """A copy of ``path`` with the first ``old`` after entry ``at``'s header made ``new``."""
    text = path.read_text(encoding="utf-8")
    start = text.index(f"\n[[history]]\nentry = {at}\n")
    where = text.index(old, start)
    copy = path.with_name(name)
    copy.write_text(text[:where] + new + text[where + len(old):], encoding="utf-8")
    return copy


# -- the digest ------------------------------------------------------------------

def test_every_save_ends_the_file_with_the_digest_of_everything_above_it(tmp_path):
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "10k"}, note="more gain")
    raw = path.read_bytes()
    start = raw.rindex(b"\n[ledger_digest]\n")
    tail = tomllib.loads(raw[start:].decode())["ledger_digest"]
    assert tail == {"entries": 2, "sha256": hashlib.sha256(raw[:start]).hexdigest()}
    assert _DIGEST.search(raw.decode())


@pytest.mark.slow
def test_a_file_whose_digest_matches_is_read_without_the_full_check(long_file, monkeypatch):
    entries = Calls(monkeypatch, historyfile, "_entry")
    olds = Calls(monkeypatch, ledger, "_check_old")
    doc = read_document(long_file)
    assert (doc.entry_count, doc.logged, doc.comment_lines) == (6_000, doc.design, ())
    assert (entries.count, olds.count) == (0, 0)
    legacy = read_document(without_digest(long_file, "legacy.toml"))
    # The same file without its digest has the full check: every entry, every replayed step.
    assert (entries.count, olds.count) == (6_000, 5_999)
    assert legacy.design == doc.design and legacy.logged == doc.logged
    assert legacy.history == doc.history


@pytest.mark.slow
def test_a_hand_edited_old_value_deep_in_a_long_file_is_still_refused(long_file, tmp_path):
    entry = read_document(long_file).history[4_999]
    change = entry.changes[0]
    line = f'{{ key = "{change.key}", old = {change.old!r}'
    other = 12_000.0 if change.key == "stage.rc" else 820.0
    bad = edited(long_file, "bad.toml", line, f'{{ key = "{change.key}", old = {other!r}', at=5_000)
    before = bad.read_bytes()
    with pytest.raises(DesignError) as err:
        read_document(bad)
    assert (err.value.field, err.value.value) == ("history[5000].changes[1].old", other)
    assert "differs from the value the entries before it leave" in str(err.value)
    with pytest.raises(DesignError):
        DesignSession(str(bad)).commit({"stage.rc": "12k"})
    assert bad.read_bytes() == before  # refused, never rewritten


def test_a_wrong_digest_only_brings_back_the_full_check(tmp_path, monkeypatch):
    original = write_long_file(tmp_path / "d.toml", 200)
    text = original.read_text(encoding="utf-8")
    sha = text[-66:-2]
    flipped = tmp_path / "flipped.toml"
    flipped.write_text(text[:-66] + sha[::-1] + text[-2:], encoding="utf-8")
    counted = tmp_path / "miscounted.toml"
    counted.write_text(text.replace("\nentries = 200\n", "\nentries = 199\n"), encoding="utf-8")
    olds = Calls(monkeypatch, ledger, "_check_old")
    for path in (flipped, counted):
        before = olds.count
        doc = read_document(path)
        assert olds.count - before == 199, path.name  # a consistent history, so it is still read
        assert len(doc.history) == 200 and doc.verified_text is None


def test_a_digest_table_that_is_not_one_is_refused_with_one_line(tmp_path):
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    path.write_text(path.read_text(encoding="utf-8") + "extra = 1\n", encoding="utf-8")
    with pytest.raises(DesignError) as err:
        read_document(path)
    assert err.value.field == "ledger_digest" and "entries and sha256" in str(err.value)
    assert "\n" not in str(err.value)


def test_a_hand_edit_of_the_design_above_the_digest_is_found_and_logged(tmp_path, monkeypatch):
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "10k"})
    text = path.read_text(encoding="utf-8")
    path.write_text(text.replace("re1 = 220.0", "re1 = 330.0", 1), encoding="utf-8")
    olds = Calls(monkeypatch, ledger, "_check_old")
    with DesignSession(str(path)) as s:
        assert olds.count == 1  # the full check, since the digest no longer matches
        assert [(c.key, c.old, c.new) for c in s.hand_edits] == [("stage.re1", 220.0, 330.0)]
        s.commit({"stage.rc": "12k"})
    history = read_document(path).history
    assert [e.action for e in history] == ["start", "set", "hand-edit", "set"]


def test_an_inconsistent_history_written_without_the_tool_gets_the_full_check(tmp_path):
    """dumps_document (what a hand edit or another program writes) adds no
    digest, so item 3's refusals hold for such files."""
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "10k"})
        history = s.history
    wrong = dataclasses.replace(history[1], changes=(ledger.Change("stage.rc", 4700.0, 10e3),))
    text = designfile.dumps_document(read_document(path).design, [entry_text(history[0]), entry_text(wrong)])
    path.write_text(text, encoding="utf-8")
    with pytest.raises(DesignError, match=r"history\[2\]\.changes\[1\]\.old"):
        read_document(path)


# -- the fast path gives what the full one gives ------------------------------------

@pytest.mark.slow
def test_the_quick_reader_reads_every_entry_as_the_toml_parser_does(long_file):
    doc = read_document(long_file)
    steps = doc.steps()  # before the history is read whole, when it would be read from the Entries
    alone = [doc.entry(n) for n in (1, 2, 3_001, 6_000)]
    chunks = ("\n" + doc.verified_text).split(historytext.ENTRY_HEADER)[1:]
    parsed = [tomllib.loads("[[history]]\n" + c)["history"][0] for c in chunks]
    quick = [historytext._parse_chunk(c) for c in chunks]
    assert _typed(quick) == _typed(parsed)
    # All but the start entry (its design snapshot) are read without the TOML parser.
    fallbacks = 0
    for chunk in chunks:
        try:
            historytext._quick_chunk(chunk)
        except historytext._NotQuick:
            fallbacks += 1
    assert fallbacks == 1
    assert doc.history == history_from_list(parsed)
    assert [tuple(step) for step in steps] == [(e.number, e.action, e.reverses) for e in doc.history]
    assert alone == [doc.history[n - 1] for n in (1, 2, 3_001, 6_000)]


def _typed(value):
    """``value`` with the type of every leaf beside it: 1 and 1.0 must not pass for each other."""
    if isinstance(value, dict):
        return {k: _typed(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_typed(v) for v in value]
    return (type(value).__name__, value)


_NOTES = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=140)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(note=_NOTES, old=_NOTES, new=_NOTES, codes=st.lists(st.sampled_from(sorted(CODES)), max_size=3))
def test_the_quick_reader_agrees_with_toml_on_any_text(note, old, new, codes):
    """Notes and changed texts of any characters (quotes, backslashes, tabs,
    control characters, long lines that the writer puts in a table)."""
    entry = ledger.Entry(2, dt.datetime(2026, 12, 1, 20, 31, tzinfo=dt.timezone.utc), ledger.SET,
                         changes=(ledger.Change("notes", old, new), ledger.Change("stage.rc", 6800.0, 1e4)),
                         note=note, before={"ic": 1e-3, "region": "active", "tj": -0.0},
                         after={"ic": 1.5e-3, "region": "active", "av_loaded": -1e20}, raised=tuple(codes))
    chunk = entry_text(entry).removeprefix("[[history]]\n")
    parsed = tomllib.loads(entry_text(entry))["history"][0]
    assert _typed(historytext._parse_chunk(chunk)) == _typed(parsed)
    assert quick_entries(entry_text(entry)) == [entry]


@pytest.mark.slow
def test_a_commit_on_the_fast_path_writes_what_the_full_path_writes(long_file, tmp_path, monkeypatch):
    fast = long_file.with_name("fast.toml")
    fast.write_bytes(long_file.read_bytes())
    slow = without_digest(long_file, "slow.toml")
    monkeypatch.setattr(ledger, "now", lambda: dt.datetime(2030, 1, 1, tzinfo=dt.timezone.utc))
    for path in (fast, slow):
        with DesignSession(str(path)) as s:
            s.commit({"stage.rc": "12k"}, note="the same change")
            s.undo()
    assert fast.read_bytes() == slow.read_bytes()
    assert read_document(fast).verified_text is not None  # and the next read is fast again


def test_the_replay_of_a_checked_history_equals_the_full_replay(tmp_path):
    """Batched changes give the design step-by-step replay gives, across changes of topology."""
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    steps = [{"stage.rc": "10k"}, {"stage.re1": "330"}, {"topology": EF}, {"stage.re": "3.3k"},
             {"load.rl": "open"}, {"topology": CE}, {"stage.rc": "8.2k", "bias.r1": "47k"}]
    with DesignSession(str(path)) as s:
        for values in steps:
            s.commit(values)
        s.undo()
        s.undo()
        s.redo()
        history = s.history
    for n in range(1, len(history) + 1):
        full = ledger.replay(history, n)
        assert ledger.replay(history, n, checked=True) == full, n
        assert design_at(f"{path}@{n}")[0] == full, n


# -- linear growth, counted ------------------------------------------------------------

def _calls(action) -> int:
    """How many function calls ``action()`` makes: the same on every run and every machine."""
    profile = cProfile.Profile()
    profile.enable()
    action()
    profile.disable()
    return pstats.Stats(profile).total_calls


def test_loading_grows_linearly_with_the_history(tmp_path):
    """The calls that 200 more entries cost are at most twice (and a hair)
    those that 100 more cost, for each command's work: a quadratic step
    anywhere (a replay from the start per entry, a list copied per entry)
    would make it four times.  The story repeats every 5 entries, so each
    100 entries do the same work."""
    sizes = (100, 200, 400)
    files = {n: write_long_file(tmp_path / f"h{n}.toml", n) for n in sizes}
    for n in sizes:
        without_digest(files[n], f"legacy{n}.toml")

    def report(n):
        read_document(files[n]).design

    def full_check(n):
        read_document(tmp_path / f"legacy{n}.toml").history

    def history(n):
        with DesignSession(str(files[n]), lock=False) as s:
            s.history

    def fresh(n) -> str:
        # A copy per run, so that every run of a command that saves starts from the same file.
        copy = tmp_path / "copy.toml"
        copy.write_bytes(files[n].read_bytes())
        return str(copy)

    def commit(n):
        with DesignSession(fresh(n)) as s:
            s.commit({"source.vpk": "3m"})

    def undo(n):
        with DesignSession(fresh(n)) as s:
            s.undo()

    def diff(n):
        design_at(f"{files[n]}@{n // 2}")

    for action in (report, full_check, history, commit, undo, diff):
        action(sizes[0])  # the first call of each also fills caches and imports
        counts = [_calls(lambda: action(n)) for n in sizes]
        first, second = counts[1] - counts[0], counts[2] - counts[1]
        assert second <= 2.1 * first + 1000, (action.__name__, counts)


# -- the quick reader's shortcuts refuse what TOML would read otherwise ---------------

def _toml_value(text: str):
    """What TOML reads ``text`` as, as the value of a key; None when it refuses it."""
    try:
        return _typed(tomllib.loads(f"x = {text}\n")["x"])
    except tomllib.TOMLDecodeError:
        return None


def _agrees(quick, text: str, toml) -> None:
    """``quick(text)`` is what TOML reads, or a refusal, never another value."""
    try:
        got = _typed(quick(text))
    except historytext._NotQuick:
        return
    assert toml is not None, text
    # NaN is not equal to itself: compare its type and its text.
    assert repr(got) == repr(toml), text


# Values as a hand or another program might write them, beside the writer's.
_ODD_VALUES = st.sampled_from([
    "1e5", "1E5", "1e+05", "-0", "-0.0", "+0.0", "+1", "01", "00", "1_000", "1.", ".5", "1.e5", "1e400", "5e-324",
    "inf", "-inf", "+inf", "nan", "+nan", "-nan", "Infinity", "NaN", "0x10", "1 ", " 1", "true", "false", "null",
    "١٢", "²", "2026-12-01 20:31:00+00:00", "2026-12-01 20:31:00Z", "2026-12-01T20:31:00+00:00", "2026-12-01 20:31",
    '"a"', '""', '"a\\tb"', '"a\tb"', '"\\u00e9"', '"\\ud800"', '"a"b"', '"a', '"\x7f"', '"\x85"', '"\u00a0"', '"é"',
    "'a'", "[1]", "{ a = 1 }", "1 # a", '"a = b"'])
_VALUE_TEXTS = st.one_of(
    _ODD_VALUES, st.floats().map(repr), st.integers(-10**20, 10**20).map(str),
    st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=12).map(lambda s: f'"{s}"'),
    st.text("0123456789eE+-._:ninf \"", max_size=10),
)


@settings(max_examples=400, deadline=None)
@given(text=_VALUE_TEXTS)
def test_a_scalar_read_quickly_is_read_as_toml_reads_it(text):
    _agrees(historytext._scalar, text, _toml_value(text))


_NAMES = st.one_of(st.sampled_from(["ic", "vce", "region", "f_high", "yield"]),
                   st.sampled_from(["Ic", "ic.x", "i c", "", "1x", "x-y", "+x", "entry", "null", '"ic"']))
_LINES = st.tuples(_NAMES, st.one_of(st.just(" = "), st.sampled_from(["=", " =  ", "  = "])),
                   st.one_of(_ODD_VALUES, _VALUE_TEXTS)).map("".join)


@settings(max_examples=400, deadline=None)
@given(lines=st.lists(_LINES, min_size=1, max_size=3), tail=st.sampled_from(["", "\n", "\n\n"]))
@example(lines=["ic = null"], tail="")
@example(lines=["ic = 1", "ic = 2"], tail="")
@example(lines=["ic.x = 1"], tail="")
@example(lines=["ic = true"], tail="")
@example(lines=["f_high = inf"], tail="\n")
@example(lines=["ic = NaN", "vce = -Infinity"], tail="")
@example(lines=['region = "\\ud800"'], tail="")
def test_a_figures_table_read_quickly_is_read_as_toml_reads_it(lines, tail):
    """The JSON reader takes what a character and name check let through: a
    name twice, a dotted or quoted name, null, inf, a value JSON and TOML
    read differently must all be refused."""
    text = "\n".join(lines) + tail
    try:
        toml = _typed(tomllib.loads(text))
    except tomllib.TOMLDecodeError:
        toml = None
    _agrees(historytext._figures, text, toml)


@settings(max_examples=300, deadline=None)
@given(lines=st.lists(_LINES, min_size=1, max_size=4))
@example(lines=["entry = 1", "entry = 2"])
@example(lines=["Entry = 1", "_x = 2"])
@example(lines=["1x = 1"])
def test_an_entrys_head_read_quickly_is_read_as_toml_reads_it(lines):
    """Keys the partition takes apart: given twice, with spaces, dotted,
    capitals (read as TOML reads them), digits first (refused)."""
    text = "\n".join(lines)
    try:
        toml = _typed(tomllib.loads(text))
    except tomllib.TOMLDecodeError:
        toml = None
    _agrees(historytext._head, text, toml)


def test_the_shortcuts_read_the_writers_usual_values():
    """Not refusals all round: the common shapes are read without a pattern."""
    assert _typed(historytext._head('entry = 12\naction = "set"\nreverses = 0')) == _typed(
        {"entry": 12, "action": "set", "reverses": 0})
    for text in ("470.0", "1e-05", "-0.0", "1e+20", "5e-324"):
        assert _typed(historytext._scalar(text)) == _typed(float(text))
    assert historytext._scalar("2026-12-01 20:31:00+00:00") == dt.datetime(2026, 12, 1, 20, 31, tzinfo=dt.timezone.utc)
    figures = historytext._figures('ic = 0.000408306\nregion = "active"\ntj = -9.60353\n')
    assert _typed(figures) == _typed({"ic": 0.000408306, "region": "active", "tj": -9.60353})


def test_any_entry_read_alone_is_the_one_read_with_the_rest(tmp_path):
    # The last entry, which every commit reads, is found from the end of the text.
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE))
    with DesignSession(str(path)) as s:
        for rc in ("10k", "12k", "15k"):
            s.commit({"stage.rc": rc}, note=f"rc {rc}")
    doc = read_document(path)
    assert doc.verified_text is not None
    every = quick_entries(doc.verified_text)
    assert [doc.entry(n) for n in range(1, 5)] == every == read_document(without_digest(path, "full.toml")).history


def test_a_file_with_characters_of_several_bytes_is_split_where_its_bytes_are(tmp_path):
    # The digest is found in the bytes and the history in the text: a note of
    # two- and three-byte characters must not move one against the other.
    path = tmp_path / "d.toml"
    create(str(path), default_design(CE), note="Ω é — " * 50)
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "10k"}, note="µ→ " * 40)
    text = path.read_text(encoding="utf-8")
    design_text, history_text, count = historytext.verified_split(path.read_bytes(), text)
    assert design_text + history_text == text[:text.rindex("\n[ledger_digest]\n")] and count == 2
    assert history_text.startswith("[[history]]\nentry = 1\n")
    doc = read_document(path)
    assert doc.history == read_document(without_digest(path, "full.toml")).history
    assert doc.history[-1].note == "µ→ " * 40
