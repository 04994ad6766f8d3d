"""The `stageledger` command: a thin layer over model/.

Exit status: 0 on success, 2 for a bad file or argument (one line on
stderr, never a traceback), 3 for an internal fault.  A reader that stops
early (``stageledger history F | head -1``) is no fault: the rest of the
output is dropped silently and the status is 0, as it would be had the
reader taken it all; output that cannot be written (a full disk) is
status 2.  A save the command made is on disk either way.
"""

from __future__ import annotations

import argparse
import os
import sys

from model.design.fields import SERIES
from model.design.stage import TOPOLOGIES
from model.errors import StageledgerError

from .safe_text import visible


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line and status 2, as for a bad file
        # argparse quotes some arguments raw ("unrecognized arguments: ..."): escaped, as everywhere.
        self.exit(2, f"stageledger: {visible(message)}\n")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="stageledger", description="Design and tune discrete BJT amplifier stages.")
    sub = p.add_subparsers(dest="command")
    rep = sub.add_parser("report", help="print every figure of a design")
    rep.add_argument("file", help="design file (TOML)")
    rep.add_argument("--json", action="store_true", help="one JSON object with plain SI numbers")

    resp = sub.add_parser("response", help="print the frequency sweep of av_source (or --csv)")
    resp.add_argument("file", help="design file (TOML)")
    resp.add_argument("--csv", action="store_true", help="freq_hz,gain_db,phase_deg rows for a spreadsheet")
    resp.add_argument("--per-decade", type=_per_decade, default=20, metavar="N",
                      help="sweep points per decade (1 to 1000; default 20)")

    new = sub.add_parser("new", help="create a design file from defaults or from another design")
    new.add_argument("file")
    new.add_argument("--topology", choices=TOPOLOGIES)
    new.add_argument("--from", dest="origin", metavar="OTHER", help="copy this design (FILE or FILE@N)")
    new.add_argument("assignments", nargs="*", metavar="KEY=VALUE",
                     help="starting values, for example supply.vcc=12 load.rl=10k")

    st = sub.add_parser("set", help="apply a what-if change, log it with its consequences and save")
    st.add_argument("file")
    st.add_argument("assignments", nargs="+", metavar="KEY=VALUE", help="for example stage.rc=10k")
    st.add_argument("--note", default="", help="why, in a few words")
    st.add_argument("--dry-run", action="store_true", help="show the consequences without saving")
    st.add_argument("--drop-comments", action="store_true", help="allow the save to drop # comments")

    for name, text in (("undo", "reverse the last change (logged as a new entry)"),
                       ("redo", "re-apply the last undone change (logged as a new entry)")):
        rev = sub.add_parser(name, help=text)
        rev.add_argument("file")
        rev.add_argument("--note", default="")
        rev.add_argument("--drop-comments", action="store_true")

    hist = sub.add_parser("history", help="print the change log")
    hist.add_argument("file")
    form = hist.add_mutually_exclusive_group()
    form.add_argument("--json", action="store_true", help="one JSON object: entries and unlogged hand edits")
    form.add_argument("--oneline", action="store_true",
                      help="one line per entry: number, time, action, change, biggest consequences, note")

    spr = sub.add_parser("spread", help="Monte Carlo over the tolerances: spread, yield, worst cases")
    spr.add_argument("file", help="design file (TOML) with [tolerance] and [spec] tables")
    spr.add_argument("--samples", type=_whole("--samples", 1, MAX_SAMPLES), default=10_000, metavar="N",
                     help=f"builds to draw (1 to {MAX_SAMPLES:,}; default 10,000)")
    spr.add_argument("--seed", type=_whole("--seed", 0, 2**63 - 1), default=None, metavar="S",
                     help="seed of the draw (default: a fixed seed, printed)")
    out = spr.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="one JSON object with plain SI numbers")
    out.add_argument("--csv", action="store_true", help="one row per build: varied values, then figures")

    am = sub.add_parser("aim", help="find the value of a knob that brings a figure to a target, snapped to the series")
    am.add_argument("file")
    am.add_argument("target", metavar="FIGURE=TARGET", help="for example av_loaded=30dB or rin=20k")
    am.add_argument("--vary", action="append", required=True, metavar="KEY", help="a key to vary (repeatable)")
    am.add_argument("--series", choices=SERIES, help="preferred series to snap to (default: the design's)")
    am.add_argument("--dry-run", action="store_true", help="show the result without saving")
    am.add_argument("--note", default="", help="added to the generated note")
    am.add_argument("--drop-comments", action="store_true", help="allow the save to drop # comments")

    opt = sub.add_parser("options", help="every usual way to bring a figure to a target, cheapest first")
    opt.add_argument("file")
    opt.add_argument("target", metavar="FIGURE=TARGET")
    opt.add_argument("--json", action="store_true", help="one JSON object with plain SI numbers")

    prop = sub.add_parser("propose", help="propose a design in preferred values from specs and a supply")
    prop.add_argument("file", help="the new design file to write (never overwritten)")
    prop.add_argument("--topology", choices=TOPOLOGIES, default=TOPOLOGIES[0])
    prop.add_argument("--spec", action="append", required=True, metavar="KEY=MIN..MAX",
                      help="a figure's range, also KEY=[MIN,MAX]; repeat for each spec")
    prop.add_argument("--supply", type=_volts, default=None, metavar="V", help="supply voltage (default: the topology's)")
    prop.add_argument("--series", default="E24", help="preferred series of the resistors (default E24)")
    prop.add_argument("--from", dest="origin", metavar="OTHER",
                      help="keep this design's source, load, transistor and tolerance (FILE or FILE@N)")

    sens = sub.add_parser("sensitivity", help="what a 1 % rise of each knob does to each figure")
    sens.add_argument("file", help="design file (TOML)")
    sens.add_argument("--json", action="store_true", help="one JSON object: method, step, columns, rows")
    sens.add_argument("--yield", dest="with_yield", action="store_true",
                      help="add the yield against the specs (a few seconds: a Monte Carlo per knob)")

    diff = sub.add_parser("diff", help="parameter and figure differences between two designs")
    diff.add_argument("a", help="FILE or FILE@N (the design after history entry N)")
    diff.add_argument("b", help="FILE or FILE@N")
    return p


#: The most builds one spread run draws: a million would take minutes and gigabytes.
MAX_SAMPLES = 200_000


def _whole(flag: str, low: int, high: int):
    def parse(text: str) -> int:
        try:
            n = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{flag} {text!r} must be a whole number from {low:,} to {high:,}") from None
        if not low <= n <= high:
            raise argparse.ArgumentTypeError(f"{flag} {n:,} must be from {low:,} to {high:,}")
        return n
    return parse


def _per_decade(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--per-decade {text!r} must be a whole number from 1 to 1000") from None
    if not 1 <= n <= 1000:
        raise argparse.ArgumentTypeError(f"--per-decade {n} must be from 1 to 1000")
    return n


def _volts(text: str) -> float:
    from model.design.fields import check_value

    try:
        return check_value("supply.vcc", TOPOLOGIES[0], text)
    except StageledgerError as exc:
        raise argparse.ArgumentTypeError(f"--supply {exc}") from None


def _dispatch(args) -> int:
    if args.command == "history":  # first: it reads the file alone, without the engine
        from .history_command import cmd_history

        return cmd_history(args.file, args.json, args.oneline)
    from . import subcommands

    if args.command == "report":
        return _report(args.file, args.json)
    if args.command == "response":
        return _response(args.file, args.csv, args.per_decade)
    if args.command == "new":
        return subcommands.cmd_new(args.file, args.topology, args.origin, args.assignments)
    if args.command == "set":
        return subcommands.cmd_set(args.file, args.assignments, args.note, args.dry_run, args.drop_comments)
    if args.command in ("undo", "redo"):
        return subcommands.cmd_reverse(args.file, args.command, args.note, args.drop_comments)
    if args.command == "diff":
        return subcommands.cmd_diff(args.a, args.b)
    if args.command in ("aim", "options"):
        from . import advisor_commands

        if args.command == "aim":
            return advisor_commands.cmd_aim(args.file, args.target, args.vary, args.series, args.dry_run,
                                            args.note, args.drop_comments)
        return advisor_commands.cmd_options(args.file, args.target, args.json)
    if args.command == "propose":
        from .propose_text import cmd_propose

        return cmd_propose(args.file, args.topology, args.spec, args.supply, args.series, args.origin)
    if args.command == "spread":
        return _spread(args.file, args.samples, args.seed, args.json, args.csv)
    if args.command == "sensitivity":
        return _sensitivity(args.file, args.json, args.with_yield)
    from .launch import run

    return run(args.file, args.read_only)


def _report(path: str, as_json: bool) -> int:
    import model
    from model.files import plain_json

    from .report import render_report

    design = model.read_design(path)
    figures = model.analyse(design)
    if as_json:
        print(plain_json.dumps(figures.to_dict()))
    else:
        sys.stdout.write(render_report(design, figures, path))
    return 0


def _response(path: str, as_csv: bool, per_decade: int) -> int:
    import model

    from .report import render_response

    design = model.read_design(path)
    sys.stdout.write(render_response(design, model.analyse(design, per_decade=per_decade), path, as_csv))
    return 0


def _spread(path: str, samples: int, seed: int | None, as_json: bool, as_csv: bool) -> int:
    import model
    from model.files import plain_json
    from model.spread.analysis import spread_report
    from model.spread.builds import DEFAULT_SEED

    from .spread_text import render_csv, render_spread

    report = spread_report(model.read_design(path), samples, DEFAULT_SEED if seed is None else seed)
    if as_json:
        print(plain_json.dumps(report.to_dict()))
    elif as_csv:
        sys.stdout.write(render_csv(report))
    else:
        sys.stdout.write(render_spread(report, path))
    return 0


def _sensitivity(path: str, as_json: bool, with_yield: bool) -> int:
    import model
    from model.advisor.sensitivity import sensitivity_matrix
    from model.files import plain_json

    from .sensitivity_text import render_sensitivity

    design = model.read_design(path)
    sens = sensitivity_matrix(design, with_yield=with_yield)
    if as_json:
        print(plain_json.dumps(sens.to_dict()))
    else:
        sys.stdout.write(render_sensitivity(sens, design, path))
    return 0


def _parse(argv: list) -> argparse.Namespace:
    """The subcommand's arguments. ``new FILE --topology T KEY=VALUE ...``
    puts its starting values after an option, where argparse, having taken
    the positionals before it, would refuse them: they are collected here."""
    parser = _parser()
    if argv[0] != "new":
        return parser.parse_args(argv)
    args, extra = parser.parse_known_args(argv)
    unknown = [x for x in extra if x.startswith("-")]
    if unknown:
        parser.error(f"unrecognized arguments: {' '.join(unknown)}")
    args.assignments = [*args.assignments, *extra]
    return args


#: The subcommands; anything else in first place is a design file for the workbench.
COMMANDS = ("report", "response", "new", "set", "undo", "redo", "history", "diff", "spread", "aim", "options",
            "propose", "sensitivity")


def _workbench_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="stageledger", description="Open a design in the workbench "
                "(the bundled demo without FILE). Subcommands: " + ", ".join(COMMANDS) + ".")
    p.add_argument("file", nargs="?", help="design file (TOML); offered for creation if missing")
    p.add_argument("--read-only", action="store_true", help="open without taking the edit lock")
    return p


class _OutputFailed(Exception):
    """Writing to stdout failed (a full disk, an I/O error): not a fault of ours."""

    def __init__(self, err: OSError):
        super().__init__(os.strerror(err.errno).lower() if err.errno else str(err))


class _Output:
    """sys.stdout as the commands see it: an OSError from writing or flushing
    it becomes _OutputFailed, so that main can tell it apart from any other
    OSError (a closed pipe stays BrokenPipeError, which main handles too)."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text: str) -> int:
        try:
            return self._stream.write(text)
        except BrokenPipeError:
            raise
        except OSError as err:
            raise _OutputFailed(err) from None

    def flush(self) -> None:
        try:
            self._stream.flush()
        except BrokenPipeError:
            raise
        except OSError as err:
            raise _OutputFailed(err) from None

    def __getattr__(self, name):
        return getattr(self._stream, name)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    real = sys.stdout
    if real is not None:  # None when Python was started with stdout closed
        sys.stdout = _Output(real)
    try:
        try:
            if argv and argv[0] in COMMANDS:
                args = _parse(argv)
            else:
                args = _workbench_parser().parse_args(argv)
                args.command = None
        except SystemExit:
            _flush()  # --help's text: a closed pipe or a full disk shows here
            raise
        if args.command is None:
            sys.stdout = real  # the workbench's screen is Textual's own business
        status = _dispatch(args)
        _flush()  # a closed pipe or a full disk shows here, not at interpreter exit
        return status
    except BrokenPipeError:
        _drop_stdout(real)
        return 0
    except _OutputFailed as failed:
        _drop_stdout(real)
        print(f"stageledger: the output could not be written: {failed}", file=sys.stderr)
        return 2
    except StageledgerError as exc:
        # A message may quote the file's path or its text: escaped, as everywhere.
        print(f"stageledger: {visible(str(exc))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except Exception as exc:  # a fault of ours: still one line, never a traceback
        print(f"stageledger: internal error ({type(exc).__name__}: {visible(str(exc))}); please report it",
              file=sys.stderr)
        return 3
    finally:
        sys.stdout = real


def _flush() -> None:
    if sys.stdout is not None:
        sys.stdout.flush()


def _drop_stdout(stream) -> None:
    """Point ``stream``'s descriptor at the null device, so that the
    interpreter's last flush of what is still buffered for a closed pipe or a
    full disk cannot fail again and print "Exception ignored" (the recipe of
    the Python docs, signal module, "Note on SIGPIPE")."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, stream.fileno())
    except (OSError, ValueError, AttributeError):  # a stream with no descriptor (a test's capture)
        pass


if __name__ == "__main__":
    sys.exit(main())
