"""Mutated design files through the commands (issue 16, "Tests").

A few hundred files, each derived from a bundled demo (or from a demo with
a logged history) by seeded mutations: byte flips, truncations, duplicated
and deleted lines, swapped values, huge and degenerate numbers, deep
nesting, odd unicode and raw control characters.  Each goes through
`report`, `history` and `set`, and whatever the file holds:

* the exit status is 0 or 2 (3 would be a fault of ours);
* a refusal is one line on stderr, never a traceback, and nothing else is
  said on stderr (no leaked warnings either);
* a refused command leaves the file's bytes as they were, and `report` and
  `history` never change them;
* a `set` that saves writes a file that the reader opens again.

The commands run in-process through tui.cli.main, which is what the real
command runs (tui/__main__.py calls it); test_in_process_matches_the_real_command
checks that for a few cases against a subprocess.  Python's warnings are
recorded rather than left to pytest, whose own capture would hide them.
"""

from __future__ import annotations

import datetime as _dt
import os
import pathlib
import random
import re
import shutil
import subprocess
import sys
import warnings

import pytest

import model.files.session
from model.files import ledger
from model.files.session import DesignSession
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "saved_designs").glob("*.toml"))
SEED = 1616
CASES = 300

#: Values a mutation puts where a number was: the edges of floating point,
#: non-finite words, a number with too many digits, text and other types.
ODD_VALUES = ["1e308", "-1e308", "1e-320", "5e-324", "0", "-0.0", "inf", "-inf", "nan", "9" * 5000,
              "1_000_000_000_000_000_000_000", "0x7fffffffffffffff", '"4k7"', '"1e-30"', '"none"', '"open"',
              '"\\u001b[2J"', "true", "[]", "{}", "[1, [2, [3]]]", "1979-05-27T07:32:00Z", '""', "'lit'"]
#: Characters a mutation inserts: controls (raw, which TOML forbids), odd
#: line ends, the terminal's C1 controls, bidi overrides, a BOM, non-BMP ones.
ODD_CHARS = ["\x00", "\x07", "\x1b", "\x1b[2J", "\r", "\r\n", "\x7f", "\x85", "\x9b", "\u2028", "\u202e",
             "\ufeff", "😀", "\U0010ffff", "\t", "\\", '"', '"""', "'''", "#", "=", "[", "]", "{", "}", "."]


def _flip_byte(rng: random.Random, data: bytes) -> bytes:
    i = rng.randrange(len(data))
    return data[:i] + bytes([data[i] ^ (1 << rng.randrange(8))]) + data[i + 1:]


def _random_byte(rng: random.Random, data: bytes) -> bytes:
    i = rng.randrange(len(data))
    return data[:i] + bytes([rng.randrange(256)]) + data[i + 1:]


def _truncate(rng: random.Random, data: bytes) -> bytes:
    return data[:rng.randrange(len(data))]


def _lines(data: bytes) -> list:
    return data.split(b"\n")


def _duplicate_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i = rng.randrange(len(lines))
    lines.insert(rng.randrange(len(lines) + 1), lines[i])
    return b"\n".join(lines)


def _delete_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    del lines[rng.randrange(len(lines))]
    return b"\n".join(lines)


_ASSIGNMENT = re.compile(rb"^(\s*[A-Za-z0-9_.-]+\s*=\s*)(.+)$")


def _assignments(lines: list) -> list:
    return [i for i, line in enumerate(lines) if _ASSIGNMENT.match(line)]


def _swap_values(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    found = _assignments(lines)
    if len(found) < 2:
        return data
    a, b = rng.sample(found, 2)
    ma, mb = _ASSIGNMENT.match(lines[a]), _ASSIGNMENT.match(lines[b])
    lines[a], lines[b] = ma.group(1) + mb.group(2), mb.group(1) + ma.group(2)
    return b"\n".join(lines)


def _odd_value(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    found = _assignments(lines)
    if not found:
        return data
    i = rng.choice(found)
    lines[i] = _ASSIGNMENT.match(lines[i]).group(1) + rng.choice(ODD_VALUES).encode()
    return b"\n".join(lines)


_NUMBER = re.compile(rb"^(\s*[A-Za-z0-9_.-]+\s*=\s*)(-?[0-9][0-9_.eE+-]*)\s*$")
#: Words a design file uses, put where another word was: a valid value
#: somewhere, so a mutant can pass validation and reach the engine.
WORDS = [b'"common-emitter"', b'"emitter-follower"', b'"common-base"', b'"collector-feedback"',
         b'"common-emitter-split"', b'"pnp"', b'"npn"', b'"none"', b'"open"', b'"normal"', b'"uniform"',
         b'"E6"', b'"E96"', b'"active"', b'"undo"', b'"set"']


def _design_lines(lines: list, pattern: re.Pattern) -> list:
    """Lines matching ``pattern`` in the design, before any history: a
    change there is a plausible hand edit, where most history edits are
    refused by the replay at once."""
    end = next((i for i, line in enumerate(lines) if line.startswith(b"[[history]]")), len(lines))
    return [i for i in range(end) if pattern.match(lines[i])]


def _scale_number(rng: random.Random, data: bytes) -> bytes:
    """A number made far larger or smaller (or its sign flipped): often
    still valid, it takes the engine to the edges of its bounds."""
    lines = _lines(data)
    found = _design_lines(lines, _NUMBER)
    if not found:
        return data
    i = rng.choice(found)
    head, number = _NUMBER.match(lines[i]).groups()
    try:
        value = float(number.replace(b"_", b""))
    except ValueError:
        return data
    factor = rng.choice((-1.0, 10.0 ** rng.uniform(-40, 40), 10.0 ** rng.randint(-3, 3), 0.0))
    lines[i] = head + repr(value * factor if value else factor).encode()
    return b"\n".join(lines)


def _swap_word(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    found = _design_lines(lines, re.compile(rb'^\s*[A-Za-z0-9_.-]+\s*=\s*"'))
    if not found:
        return data
    i = rng.choice(found)
    lines[i] = _ASSIGNMENT.match(lines[i]).group(1) + rng.choice(WORDS)
    return b"\n".join(lines)


def _deep_nesting(rng: random.Random, data: bytes) -> bytes:
    depth = rng.choice((20, 200, 1000, 5000))
    kind = rng.randrange(3)
    if kind == 0:
        extra = b"deep = " + b"[" * depth + b"]" * depth
    elif kind == 1:
        extra = b"deep = " + b"{a = " * depth + b"1" + b"}" * depth
    else:
        extra = b".".join([b"k"] * depth) + b" = 1"
    lines = _lines(data)
    lines.insert(rng.randrange(len(lines) + 1), extra)
    return b"\n".join(lines)


def _odd_chars(rng: random.Random, data: bytes) -> bytes:
    text = data.decode("utf-8", "surrogateescape")
    for _ in range(rng.randint(1, 3)):
        quotes = [m.start() + 1 for m in re.finditer('"', text)]
        # Inside a string half the time (where TOML allows more), anywhere otherwise.
        i = rng.choice(quotes) if quotes and rng.random() < 0.5 else rng.randrange(len(text) + 1)
        text = text[:i] + rng.choice(ODD_CHARS) * rng.choice((1, 1, 1, 3, 4000)) + text[i:]
    return text.encode("utf-8", "surrogateescape")


MUTATIONS = (_flip_byte, _random_byte, _truncate, _duplicate_line, _delete_line, _swap_values, _odd_value,
             _deep_nesting, _odd_chars, _scale_number, _scale_number, _scale_number, _swap_word, _swap_word)


def mutant(number: int, bases: list) -> tuple[str, bytes]:
    """(label, bytes) of case ``number``: its own seeded generator, so any
    one case can be rerun alone and reads the same."""
    rng = random.Random(SEED * 100_003 + number)
    base_name, data = rng.choice(bases)
    names = []
    for _ in range(rng.choice((1, 1, 1, 2, 3))):
        mutation = rng.choice(MUTATIONS)
        names.append(mutation.__name__.strip("_"))
        if data:
            data = mutation(rng, data)
    return f"{base_name}:{'+'.join(names)}", data


@pytest.fixture(scope="module")
def bases(tmp_path_factory) -> list:
    """(name, bytes) of each demo, and of one demo after logged changes, an
    undo and a hand edit (so the history and its replay are fuzzed too),
    logged at a fixed time so that every run mutates the same bytes."""
    out = [(p.stem, p.read_bytes()) for p in DEMOS]
    path = tmp_path_factory.mktemp("fuzz-base") / "logged.toml"
    shutil.copyfile(ROOT / "saved_designs" / "hydrophone_buoy.toml", path)
    fixed = _dt.datetime(2026, 12, 1, 20, 31, tzinfo=_dt.timezone.utc)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(ledger, "now", lambda: fixed)
        with DesignSession(path) as s:
            s.commit({"source.vpk": "2m", "notes": "line one\nline \x1b[1mtwo\x1b[0m"}, note="a \"quoted\" note")
            s.commit({"load.rl": "22k"})
            s.undo("back")
        text = path.read_text(encoding="utf-8").replace("vpk = 0.002", "vpk = 0.0025", 1)
        path.write_text(text, encoding="utf-8")
    out.append(("logged", path.read_bytes()))
    return out


@pytest.fixture
def quick_ledger(monkeypatch):
    """The ledger's yield from 64 builds instead of 2,000: the same code on
    the same paths, at a cost that lets a few hundred commits run."""
    monkeypatch.setattr(model.files.session, "LEDGER_SAMPLES", 64)


def run(capsys, *args) -> tuple[int, str, str, list]:
    """(status, stdout, stderr, warnings issued) of one in-process command."""
    with warnings.catch_warnings(record=True) as issued:
        warnings.simplefilter("always")
        code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err, [str(w.message) for w in issued]


def problems_of(result: tuple, label: str) -> list:
    """What is wrong with one command's (status, stdout, stderr, warnings)."""
    code, _, err, issued = result
    found = []
    if code not in (0, 2):
        found.append(f"{label}: exit {code}: {err.strip()}")
    if "Traceback" in err:
        found.append(f"{label}: a traceback")
    if issued:
        found.append(f"{label}: warnings leaked: {issued[:3]}")
    if code == 2 and not (len(err.splitlines()) == 1 and err.startswith("stageledger: ")):
        found.append(f"{label}: not one line: {err[:300]!r}")
    if code == 0 and err:
        found.append(f"{label}: stderr on success: {err[:300]!r}")
    return found


# Slow: 11 s for the 300 cases on the two shared cores (load 2.6); they still run in CI.
@pytest.mark.slow
def test_mutated_files_exit_0_or_2_in_one_line_and_are_never_damaged(tmp_path, capsys, bases, quick_ledger):
    outcomes, problems = {}, []
    for number in range(CASES):
        label, data = mutant(number, bases)
        label = f"case {number} ({label})"
        path = tmp_path / f"case{number}" / "design.toml"
        path.parent.mkdir()
        path.write_bytes(data)
        for command in (("report",), ("history",), ("history", "--json")):
            problems += problems_of(run(capsys, command[0], path, *command[1:]), f"{label} {' '.join(command)}")
            if path.read_bytes() != data:
                problems.append(f"{label}: {command} changed the file")
        drop = ("--drop-comments",) if number % 2 else ()
        result = run(capsys, "set", path, "source.vpk=1.5m", "--note", "fuzz", *drop)
        problems += problems_of(result, f"{label} set")
        if result[0] != 0 and path.read_bytes() != data:
            problems.append(f"{label}: a refused set changed the file")
        if result[0] == 0:
            # The writer never writes a file the reader refuses.
            after = run(capsys, "report", path)
            if after[0] != 0:
                problems.append(f"{label}: the file set saved is refused: {after[2].strip()}")
        outcomes[result[0]] = outcomes.get(result[0], 0) + 1
    assert not problems, f"{len(problems)} problems, the first: " + "\n".join(problems[:12])
    # Both outcomes occur, or the mutations would be too weak (or too strong) to test anything.
    assert outcomes.get(0, 0) >= CASES // 10 and outcomes.get(2, 0) >= CASES // 10, outcomes


def stageledger(*args) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "tui", *map(str, args)], cwd=ROOT, env=env,
                          capture_output=True, timeout=120)


def test_in_process_matches_the_real_command(tmp_path, capsys, bases):
    """The premise of the test above, for one accepted and two refused
    mutants: the same status, stdout and stderr as a real `stageledger`."""
    wanted, picked = {0: 1, 2: 2}, []
    for number in range(CASES):
        label, data = mutant(number, bases)
        path = tmp_path / f"case{number}.toml"
        path.write_bytes(data)
        code, out, err, _ = run(capsys, "report", path)
        if wanted.get(code, 0) > 0:
            wanted[code] -= 1
            picked.append((path, code, out, err))
        if not any(wanted.values()):
            break
    assert len(picked) == 3
    for path, code, out, err in picked:
        proc = stageledger("report", path)
        assert (proc.returncode, proc.stdout.decode(), proc.stderr.decode()) == (code, out, err)


# -- what the fuzz found, one focused case each -------------------------------------------------

def _demo_with(tmp_path, demo: str, old: bytes, new: bytes) -> pathlib.Path:
    data = (ROOT / "saved_designs" / demo).read_bytes()
    assert old in data
    path = tmp_path / "design.toml"
    path.write_bytes(data.replace(old, new, 1))
    return path


@pytest.mark.parametrize("demo, old, new, field, bound", [
    # Seed case 1460: exit 3 (math domain error in the corner search) for a load capacitance of 1e308 F.
    ("hydrophone_buoy.toml", b"cl = 1e-09", b"cl = 1e308", "load.cl", "at most 1000 F"),
    # Seed case 1683: numpy's overflow warnings on stderr for a β temperature exponent of 3.6e24.
    ("geophone_preamp.toml", b"xtb = 1.5", b"xtb = 3.6499111390186373e+24", "transistor.xtb", "from -50 to 50"),
    ("geophone_preamp.toml", b"xti = 3.0", b"xti = -1e6", "transistor.xti", "from -50 to 50"),
])
def test_values_the_fuzz_broke_are_refused_with_their_bound(tmp_path, capsys, demo, old, new, field, bound):
    path = _demo_with(tmp_path, demo, old, new)
    data = path.read_bytes()
    for command in ("report", "set"):
        args = ("source.vpk=1.5m",) if command == "set" else ()
        code, out, err, issued = run(capsys, command, path, *args)
        assert code == 2 and not issued, (code, err, issued)
        assert len(err.splitlines()) == 1 and field in err and bound in err, err
    assert path.read_bytes() == data


def test_a_start_snapshot_with_a_value_out_of_bounds_is_refused_before_any_analysis(tmp_path, capsys, bases):
    """Case 1460 itself: the huge cl sat in the history's start snapshot,
    so `report` (the design on top) passed and `set`, analysing the logged
    design for its hand-edit entry, failed with exit 3."""
    data = dict(bases)["logged"]
    head, _, tail = data.partition(b"[[history]]")
    assert b"cl = 1e-09" in tail
    path = tmp_path / "design.toml"
    path.write_bytes(head + b"[[history]]" + tail.replace(b"cl = 1e-09", b"cl = 1e308", 1))
    code, _, err, issued = run(capsys, "set", path, "source.vpk=1.5m")
    assert code == 2 and not issued and "history[1].design.load.cl" in err, err


@pytest.mark.parametrize("demo, old, new", [
    ("hydrophone_buoy.toml", b"cl = 1e-09", b"cl = 1000.0"),
    ("geophone_preamp.toml", b"xtb = 1.5", b"xtb = 50.0"),
    ("geophone_preamp.toml", b"xtb = 1.5", b"xtb = -50.0"),
    ("geophone_preamp.toml", b"xti = 3.0", b"xti = 50.0"),
    ("geophone_preamp.toml", b"xti = 3.0", b"xti = -50.0"),
])
def test_values_at_the_new_bounds_still_get_a_report_without_warnings(tmp_path, capsys, demo, old, new):
    code, out, err, issued = run(capsys, "report", _demo_with(tmp_path, demo, old, new))
    assert (code, err, issued) == (0, "", [])


@pytest.mark.parametrize("replacements", [
    # Near absolute zero the scaled IS underflows to 0 (IS·(T/T0)^XTI·exp(EG/VT·(T/T0 − 1)),
    # Getreu 1976); the junction's critical voltage once divided by it.
    ((b"ambient = -10.0", b"ambient = -273.0"),),
    ((b"ambient = -10.0", b"ambient = -200.0"), (b"xti = 3.0", b"xti = 50.0"), (b"eg = 1.11", b"eg = 4.99")),
    ((b"ambient = [-25, 45]", b"ambient = [-273.1, 45]"),),
])
def test_a_junction_near_absolute_zero_gets_an_answer_without_warnings(tmp_path, capsys, replacements):
    path = tmp_path / "design.toml"
    data = (ROOT / "saved_designs" / "geophone_preamp.toml").read_bytes()
    for old, new in replacements:
        assert old in data
        data = data.replace(old, new, 1)
    path.write_bytes(data)
    for command in ("report", "spread"):
        code, out, err, issued = run(capsys, command, path)
        assert code in (0, 2) and not issued, (command, code, err, issued)
        assert len(err.splitlines()) == (code == 2), err


def test_a_beta_spread_past_any_real_part_is_refused_with_its_bound(tmp_path, capsys):
    path = _demo_with(tmp_path, "geophone_preamp.toml", b"beta = [100, 400]", b"beta = [0.001, 1e300]")
    code, _, err, issued = run(capsys, "spread", path)
    assert code == 2 and not issued and "tolerance.beta" in err and "at most 1e6" in err, err
