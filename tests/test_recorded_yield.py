"""A commit reads its before-yield from the last entry when that record is
certainly this engine's, and draws the builds again whenever it may not be.

The yield the ledger records comes from the same LEDGER_SAMPLES builds with
a fixed seed, so the last entry's after-yield is exactly what drawing again
would give; reading it spares the command line a tenth of a second a
commit.  Each test counts the draws and checks the logged value against a
fresh draw, so a reuse that logged a different number would fail.
"""

from __future__ import annotations

import pathlib
import re

import pytest

from model.files import session as session_module
from model.files.designfile import read_document
from model.files.historytext import digest_text
from model.files.session import DesignSession, create, ledger_yield

DEMO = pathlib.Path(__file__).resolve().parents[1] / "saved_designs" / "geophone_preamp.toml"


class Draws:
    """Counts the session's yield draws, still drawing."""

    def __init__(self, monkeypatch):
        self.count = 0
        real = session_module.quick_yield

        def counted(*args, **kw):
            self.count += 1
            return real(*args, **kw)

        monkeypatch.setattr(session_module, "quick_yield", counted)


@pytest.fixture
def logged(tmp_path) -> pathlib.Path:
    """The geophone demo (it has specs) with a start entry and one change."""
    path = tmp_path / "geophone.toml"
    create(str(path), read_document(DEMO).design)
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "9k1"})
    return path


def _commit_counting(path: pathlib.Path, monkeypatch) -> tuple:
    draws = Draws(monkeypatch)
    with DesignSession(str(path)) as s:
        old = s.design
        entry = s.commit({"stage.rc": "12k"})
    return draws.count, entry, old


def test_the_before_yield_is_read_from_the_last_entry_and_is_what_a_draw_gives(logged, monkeypatch):
    count, entry, old = _commit_counting(logged, monkeypatch)
    assert count == 1  # only the new design's builds are drawn
    assert entry.before["yield"] == ledger_yield(old)
    assert entry.after["yield"] == ledger_yield(read_document(logged).design)


def test_a_file_without_its_digest_has_the_before_yield_drawn_again(logged, monkeypatch):
    text = logged.read_text(encoding="utf-8")
    logged.write_text(re.sub(r"\n\[ledger_digest\]\n.*\Z", "\n", text, flags=re.S), encoding="utf-8")
    count, entry, old = _commit_counting(logged, monkeypatch)
    assert count == 2
    assert entry.before["yield"] == ledger_yield(old)


def test_a_record_whose_figures_this_engine_does_not_give_has_the_yield_drawn_again(logged, monkeypatch):
    # As another version of the engine would have written it: one figure of
    # the last entry differs, and the digest is right for the bytes.
    body = logged.read_text(encoding="utf-8")
    body = body[:body.rindex("\n[ledger_digest]\n")]
    last = body.rindex("[history.after]\n")
    ic = re.compile(r"ic = ([0-9.e-]+)\n")
    value = float(ic.search(body, last).group(1))
    body = body[:last] + ic.sub(f"ic = {value * 1.01!r}\n", body[last:], count=1)
    recorded = float(re.search(r"yield = ([0-9.]+)\n", body[last:]).group(1))
    logged.write_text(body + digest_text(body, 2), encoding="utf-8")
    assert read_document(logged).verified_text is not None  # the fast path, yet not trusted for the yield
    count, entry, old = _commit_counting(logged, monkeypatch)
    assert count == 2
    assert entry.before["yield"] == ledger_yield(old) == recorded


def test_a_hand_edit_since_the_last_entry_has_every_yield_drawn(logged, monkeypatch):
    text = logged.read_text(encoding="utf-8")
    assert "re1 = 150.0\n" in text
    logged.write_text(text.replace("re1 = 150.0\n", "re1 = 160.0\n", 1), encoding="utf-8")
    count, entry, old = _commit_counting(logged, monkeypatch)
    assert count == 3  # the design the ledger left, the hand-edited one, and the new one
    assert entry.before["yield"] == ledger_yield(old)
