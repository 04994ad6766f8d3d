"""The workbench's editing state stays plain: tui/workstate.py (and the
field text it compares with) may use model/ but never textual or rich, so
the editing rules are tested without a screen (tests/test_workstate.py)."""

import pathlib
import subprocess
import sys

from test_layering import _imported_roots

TUI_DIR = pathlib.Path(__file__).resolve().parents[1] / "tui"
PLAIN = ("workstate.py", "fieldtext.py", "safe_text.py")
FORBIDDEN = ("textual", "rich")


def test_the_plain_modules_import_no_ui_code():
    # A relative import (from .widgets import ...) would reach Textual too.
    for name in PLAIN:
        path = TUI_DIR / name
        assert sorted(_imported_roots(path) & set(FORBIDDEN)) == [], name
        text = path.read_text(encoding="utf-8")
        assert "from .widgets" not in text and "from .app" not in text, name


def test_importing_the_editing_state_loads_no_ui_module():
    # Catches an indirect import (through model/ or tui/__init__) that the scan cannot see.
    code = (
        "import sys, tui.workstate\n"
        "bad = [m for m in sys.modules if m.split('.')[0] in %r]\n"
        "print(','.join(bad))\n" % (FORBIDDEN,)
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=TUI_DIR.parent)
    assert out.stdout.strip() == ""
