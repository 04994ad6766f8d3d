"""The `stageledger` command: a thin layer over model/.

Exit status: 0 on success, 2 for a bad file or argument (one line on
stderr, never a traceback), 3 for an internal fault.
"""

from __future__ import annotations

import argparse
import json
import sys

from model.errors import StageledgerError


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line and status 2, as for a bad file
        self.exit(2, f"stageledger: {message}\n")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="stageledger", description="Design and tune discrete BJT amplifier stages.")
    sub = p.add_subparsers(dest="command")
    rep = sub.add_parser("report", help="print every figure of a design")
    rep.add_argument("file", help="design file (TOML)")
    rep.add_argument("--json", action="store_true", help="one JSON object with plain SI numbers")
    return p


def _report(path: str, as_json: bool) -> int:
    import model
    from .report import render_report

    design = model.read_design(path)
    figures = model.analyse(design)
    if as_json:
        print(json.dumps(figures.to_dict(), indent=2, allow_nan=False))
    else:
        sys.stdout.write(render_report(design, figures, path))
    return 0


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    try:
        if args.command == "report":
            return _report(args.file, args.json)
        # No command yet opens the workbench; until it exists, show the demo's report.
        from .bundled import default_demo

        return _report(str(default_demo()), False)
    except StageledgerError as exc:
        print(f"stageledger: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except Exception as exc:  # a fault of ours: still one line, never a traceback
        print(f"stageledger: internal error ({type(exc).__name__}: {exc}); please report it", file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
