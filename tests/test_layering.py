"""The engine must stay pure: nothing under model/ may import UI code."""

import ast
import pathlib
import subprocess
import sys

MODEL_DIR = pathlib.Path(__file__).resolve().parents[1] / "model"
FORBIDDEN = ("textual", "rich", "tui")


def _imported_roots(path: pathlib.Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    roots = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            roots.add(node.module.split(".")[0])
    return roots


def test_model_sources_import_no_ui_code():
    files = sorted(MODEL_DIR.rglob("*.py"))
    assert files, "model/ has no Python files to check"
    offenders = {
        str(f.relative_to(MODEL_DIR)): sorted(_imported_roots(f) & set(FORBIDDEN))
        for f in files
    }
    offenders = {name: mods for name, mods in offenders.items() if mods}
    assert offenders == {}


def test_importing_model_loads_no_ui_module():
    # Catches indirect imports (a dependency that pulls in rich) that the
    # static scan above cannot see.
    code = (
        "import importlib, pkgutil, sys, model\n"
        "for m in pkgutil.walk_packages(model.__path__, 'model.'): importlib.import_module(m.name)\n"
        "bad = [m for m in sys.modules if m.split('.')[0] in %r]\n"
        "print(','.join(bad))\n" % (FORBIDDEN,)
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        check=True,
        cwd=MODEL_DIR.parent,
    )
    assert out.stdout.strip() == ""


def test_reading_a_design_file_and_its_history_imports_no_engine():
    # `history` reads a file and words its ledger; importing the engine
    # (numpy and the analyses) would cost it a fifth of a second, so the file
    # layer names the engine's types only for annotations.
    light = ("model.analyses.checks", "model.analyses.regions")  # warning codes and region names
    code = (
        "import sys, model, tui.history_command\n"
        f"engine = [m for m in sys.modules if m.split('.')[0] == 'numpy'"
        f" or (m.startswith('model.analyses.') and m not in {light!r})]\n"
        "print(','.join(engine))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=MODEL_DIR.parent)
    assert out.stdout.strip() == ""


def test_the_engine_loads_on_first_use_of_its_names():
    out = subprocess.run([sys.executable, "-c", "import model; print(model.analyse.__module__, model.Design.__name__)"],
                         capture_output=True, text=True, check=True, cwd=MODEL_DIR.parent)
    assert out.stdout.split() == ["model.analyses.figures", "Design"]
