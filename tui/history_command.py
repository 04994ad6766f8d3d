"""`stageledger history`: the ledger of a design file, as text, one line a
change or JSON; it only reads the file, so it imports no engine (a long
history is read in well under a second)."""

from __future__ import annotations

from model.files import plain_json
from model.files.designfile import read_document
from model.files.historyfile import entry_to_dict

from .consequences import render_changes, render_entry
from .ledger_text import ledger_lines
from .safe_text import visible
from .wrapping import plain


def cmd_history(path: str, as_json: bool, oneline: bool = False) -> int:
    doc = read_document(path)
    history, hand = doc.history, doc.hand_edits()
    if oneline:
        # The Ledger's own lines, with the command line's ASCII minus.
        for line in ledger_lines(history, minus="-"):
            print(plain(line))
        if hand:
            print(f"(changed by hand since entry {len(history)}: {', '.join(c.key for c in hand)})" if history
                  else f"(changed by hand: {', '.join(c.key for c in hand)})")
        return 0
    if as_json:
        items = []
        for e in history:
            d = entry_to_dict(e)
            d["time"] = e.time.isoformat().replace("+00:00", "Z")
            items.append(d)
        data = {"entries": items, "unlogged_hand_edits": [vars(c) for c in hand]}
        print(plain_json.dumps(data))
        return 0
    if not history:
        print(f"{visible(path)}: no history yet; the first change will start it")
    for e in history:
        print("\n".join(render_entry(e)))
    if hand:
        print("changed by hand since the last entry (logged with the next change):")
        print("\n".join(render_changes(hand)))
    return 0
