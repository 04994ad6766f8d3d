"""The workbench: Knobs beside a live Readout, with Pictures and the Ledger.

The app owns the open design (through a :class:`~model.files.session.DesignSession`)
and routes messages; it does no physics.  What is committed, pending, invalid
or pinned is a plain object (:class:`~tui.workstate.WorkState`): the app hands
it each message and shows what it returns.  Each keystroke in a field makes a
candidate design whose quick figures (operating point, midband, dissipation)
are computed at once; the slower sweeps (swing, distortion, frequency
response) run in a thread worker, debounced, and post their result back.
The pictures are built and drawn in a second worker once those are in.
"""

from __future__ import annotations

import os
import pathlib
import textwrap

from rich.cells import cell_len
from textual import work
from textual.app import App, ComposeResult, SystemCommand
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.widgets import Header, OptionList, Static

from model.analyses.figures import Figures, analyse
from model.design.stage import Design, with_article
from model.errors import StageledgerError
from model.files import ledger
from model.files.savefile import atomic_write
from model.files.session import DesignSession
from model.spread.analysis import LEDGER_SAMPLES, quick_yield

from .advisor_pane import AdvisorActions
from .editing import Editing
from .messages import LargeSignalReady, YieldReady
from .pictures_pane import PicturesPane
from .readout_table import PENDING, readout_table, warnings_text
from .safe_text import internal_error, visible
from .screens import HelpScreen, NotePrompt, footer_text
from .topology_screen import TopologyDialog
from .widgets.knobs import KnobAbandoned, Knobs
from .widgets.ledger_pane import LedgerPane
from .widgets.picture import Picture
from .workstate import SERIES_CYCLE_TEXT, Baseline, Candidate, Save, WorkState

#: Seconds of quiet typing before the swing and distortion sweep starts.
DEBOUNCE = 0.15


class SweepFailed(Message):
    """The sweep worker's analysis of ``design`` raised ``error``, a fault of
    ours rather than of the design (those are StageledgerErrors)."""

    def __init__(self, design: Design, error: Exception):
        super().__init__()
        self.design, self.error = design, error


class WorkbenchFault(RuntimeError):
    """The workbench ended on an unhandled exception (Textual has shown its
    traceback); raised from ``run`` so that the command line exits 3, not 0."""


class Workbench(Editing, PicturesPane, AdvisorActions, App):
    """Tune one design from the keyboard and keep the record."""

    CSS_PATH = "app.tcss"
    TITLE = "stageledger"
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (120, "-wide")]
    BINDINGS = [
        # The footer line is our own (tui.screens.FOOTER): ``show`` matters
        # only to Textual's key panel.
        Binding("f1", "help", "help", id="help"),
        # Priority: the prompt must be up before the keys typed behind F2
        # are handed on, or the note would land in a field.
        Binding("f2,ctrl+n", "note", "note", id="note", priority=True),
        Binding("f3", "toggle_ledger", "ledger", id="toggle-ledger", show=False),
        Binding("f4", "baseline", "baseline", id="baseline"),
        Binding("f5", "cycle_series", "series", id="series", show=False),
        Binding("f6", "picture", "plot", id="picture"),
        Binding("ctrl+g", "spread_figure", "spread figure", id="spread-figure", show=False),
        Binding("f7,ctrl+z", "undo", "undo", id="undo"),
        Binding("f8,ctrl+y", "redo", "redo", id="redo"),
        # Esc's twin: a terminal joins a lone Esc to a key typed soon after it.
        Binding("f9", "abandon", "abandon", id="abandon", show=False),
        Binding("f10", "quit", "quit", id="quit", priority=True),
        # Priority, as F2: the prompt must be up before the target typed behind the key.
        Binding("ctrl+t", "aim", "aim", id="aim", show=False, priority=True),
        Binding("ctrl+o", "options", "options", id="options", show=False, priority=True),
        # Priority, as F2: the dialog must be up before the Up/Down typed behind the key.
        Binding("ctrl+r", "topology", "topology", id="topology", show=False, priority=True),
    ]

    def __init__(self, design: Design, *, session: DesignSession | None, source: str,
                 demo_copy_dir: str | None = None):
        """``session`` None means read-only, or (with ``demo_copy_dir``) a bundled
        demo whose first commit saves a copy in that folder."""
        super().__init__()
        self.session = session
        self.source = source
        self.demo_copy_dir = demo_copy_dir
        #: The editing state: the committed design, the candidate, the
        #: baseline and the note; the handlers show what its methods return.
        self.state = WorkState(design, session.figures if session else analyse(design))
        self._sweep_timer = None
        #: Design → its Yield, for the designs with specs shown so far (a few).
        self._yields: dict = {}
        self._readout_rows = -1
        #: The status line's last (text, error), wrapped again on a resize.
        self._said: tuple | None = None
        self._status_rows = 1

    # What the state holds, by the names the app has always used.
    @property
    def design(self) -> Design:
        return self.state.design

    @property
    def figures(self) -> Figures:
        return self.state.figures

    @property
    def candidate(self) -> Candidate | None:
        return self.state.candidate

    @property
    def baseline(self) -> Baseline | None:
        return self.state.baseline

    @property
    def note(self) -> str:
        return self.state.note

    @note.setter
    def note(self, text: str) -> None:
        self.state.note = text

    # -- layout ---------------------------------------------------------------

    def compose(self) -> ComposeResult:
        # The size class the first resize would add, added now: adding it
        # later restyles every widget once more before the first frame.
        width = self.size.width
        self.screen.add_class(next(c for w, c in reversed(self.HORIZONTAL_BREAKPOINTS) if width >= w))
        yield Header(show_clock=False)
        with Horizontal(id="main"):
            yield Knobs(self.design, id="knobs")
            with VerticalScroll(id="readout-box"):
                # Warnings first: at 80×24 the bottom of the readout is out of sight.
                yield Static(id="warnings", markup=False)
                yield Static(id="readout")
            with Vertical(id="side"):
                with Vertical(id="pictures-box"):
                    yield Static(id="picture-title", classes="pane-title", markup=False)
                    yield Picture(id="picture")
                with Vertical(id="ledger-box"):
                    yield Static("Ledger", classes="pane-title")
                    yield LedgerPane(id="ledger")
        yield Static(id="status", markup=False)
        # Our own footer line, not Textual's: it shows every key a region
        # needs at 80 columns (see footer_text), where Textual's cuts them.
        yield Static(footer_text(width), id="keys")

    def on_mount(self) -> None:
        self.sub_title = self._where()
        self._home.query_one(LedgerPane).show(self.history)
        self._refresh_readout()
        # Start on the supply, the first value people tune; the name is above it.
        # At once, not queued: keys typed while the screen first draws must reach it.
        self._home.set_focus(self._knobs.editor)
        # Arrivals are checkpoints (see WorkState.move); this one and a Tab
        # into the panel (_entered_knobs) come with no KnobMoved.
        self.state.checkpoint(self._knobs.key)
        self._say("Tab moves, type or Up/Down to try a value, Enter commits, Esc abandons, F1 help")

    @property
    def _home(self):
        """The workbench's own screen: a dialog on top must not hide its widgets
        from a worker's result arriving meanwhile."""
        return self.screen_stack[0]

    @property
    def history(self) -> list:
        return self.session.history if self.session else []

    def _where(self, width: int | None = None) -> str:
        """The sub-title for a screen ``width`` columns wide: the file's path
        (escaped: a path may hold any byte) and how it is open, shortened to
        fit the header but never inside the file name."""
        if self.session is None:
            path = self.source
            tags = ("(bundled demo: the first commit saves a copy)", "(demo: commit saves a copy)",
                    "(demo, copied on commit)", "(demo)") if self.demo_copy_dir else ("(read-only)",)
        else:
            path = self.session.path
            tags = ("(read-only)",) if self.session.read_only else ("",)
        return fit_where(visible(path), tags, (self.size.width if width is None else width) - HEADER_ROOM)

    def on_resize(self, event) -> None:
        self.sub_title = self._where(event.size.width)
        self._home.query_one("#keys", Static).update(footer_text(event.size.width))
        # The status line's latest text (not this moment's: a key may say more first).
        self.call_after_refresh(lambda: self._said is not None and self._say(*self._said))

    # -- the readout --------------------------------------------------------------

    def _refresh_readout(self) -> None:
        shown, reference, shown_label, ref_label = self.state.comparison()
        design, compared = self.state.on_show()[0], self.state.reference_design()
        yields = None
        if design.spec or (compared is not None and compared.spec):
            yields = (self._yield_of(compared, True) if compared is not None else None,
                      self._yield_of(design, shown.large_signal))
        table = readout_table(shown, reference, shown_label=shown_label, reference_label=ref_label,
                              tj_max=design.transistor.tj_max,
                              reference_tj_max=compared.transistor.tj_max if compared is not None else None,
                              yields=yields)
        # The readout keeps its size from one keystroke to the next, so skip the
        # layout pass that would otherwise follow every update; only the spread
        # rows coming or going (specs on one side of a comparison) change it.
        rows = table.plain.count("\n")
        self._home.query_one("#readout", Static).update(table, layout=rows != self._readout_rows)
        self._readout_rows = rows
        warnings = warnings_text(shown)
        box = self._home.query_one("#warnings", Static)
        if warnings.plain != str(box.content):
            box.update(warnings)
        if not shown.large_signal:
            self._schedule_sweep(design)
        else:
            self._schedule_picture(design, shown)

    def _yield_of(self, design: Design, settled: bool):
        """The Readout's yield of ``design``: a Yield, None without specs, or
        PENDING until the yield worker (started once the sweeps are in, so
        not on every keystroke) reports."""
        if not design.spec:
            return None
        if design in self._yields:
            return self._yields[design]
        if settled:
            self._yield_worker(design)
        return PENDING

    @work(thread=True, exclusive=True, exit_on_error=False, group="yield")
    def _yield_worker(self, design: Design) -> None:
        try:
            result = quick_yield(design, LEDGER_SAMPLES)
        except Exception:  # noqa: BLE001 - the readout then keeps "…"; the figures stand
            return
        self.post_message(YieldReady(design, result))

    def on_yield_ready(self, message: YieldReady) -> None:
        if not self._in_service():
            return
        if len(self._yields) > 32:
            self._yields.clear()
        self._yields[message.design] = message.result
        if message.design in (self.state.on_show()[0], self.state.reference_design()):
            self._refresh_readout()

    def _schedule_sweep(self, design: Design) -> None:
        if self._sweep_timer is not None:
            self._sweep_timer.stop()
        self._sweep_timer = self.set_timer(DEBOUNCE, lambda: self._sweep(design))

    @work(thread=True, exclusive=True, exit_on_error=False, group="sweep")
    def _sweep(self, design: Design) -> None:
        try:
            figures = analyse(design)
        except StageledgerError:
            return  # the quick analysis already reported the problem
        except Exception as err:  # noqa: BLE001 - else the figures wait for it forever
            self.post_message(SweepFailed(design, err))
            return
        self.post_message(LargeSignalReady(design, figures))

    def on_sweep_failed(self, message: SweepFailed) -> None:
        # Only for the design on show: a newer candidate has its own sweep coming.
        if self._in_service() and self.state.on_show()[0] == message.design:
            self._say(f"sweep failed: {internal_error(message.error)}", error=True)

    def on_large_signal_ready(self, message: LargeSignalReady) -> None:
        if self._in_service() and self.state.take_figures(message.design, message.figures):
            self._refresh_readout()

    def _in_service(self) -> bool:
        """False while the app shuts down: a worker's late result is then dropped."""
        return bool(self.screen_stack) and bool(self._home.query(Picture))

    def _say(self, text: str, error: bool = False) -> None:
        self._said = (text, error)
        status = self._home.query_one("#status", Static)
        lines = status_lines(("✗ " if error else "") + text, self._home.size.width or self.size.width)
        # A layout pass only when the line grows to two rows or back to one.
        status.update("\n".join(lines), layout=len(lines) != self._status_rows)
        self._status_rows = len(lines)
        status.set_class(error, "-error")

    def _commit(self, save: Save) -> None:
        """Run ``save`` (a commit, undo or redo) through the session; report
        saved or not saved.  The state moves on only once the file is saved."""
        try:
            session = self._writable_session()
            entry = save.run(session)
        except StageledgerError as err:
            self._say(f"not saved: {_path_last(str(err), self.session.path if self.session else self.source)}",
                      error=True)
            self.notify(visible(str(err)), title="not saved", severity="error", timeout=8, markup=False)
            return
        except Exception as err:  # noqa: BLE001 - a fault of ours: keep the candidate, say so
            # The session writes the file last and moves on only after it is
            # written, so a fault on the way leaves file and memory as they were.
            self._say(f"not saved: {internal_error(err)}", error=True)
            self.notify(internal_error(err), title="not saved", severity="error", timeout=8, markup=False)
            return
        if session.design.spec:  # the session judged it for the ledger: no second Monte Carlo
            self._yields[session.design] = session.yield_result(session.design)
        outcome = self.state.saved(save, entry, session.design, session.figures, session.path, self._knobs.key)
        self._home.query_one(LedgerPane).show(session.history)
        self.sub_title = self._where()
        self._apply(outcome)
        # A change of topology can take away the editor's row (the Knobs then
        # put it on the supply): that arrival is a checkpoint too.
        self.state.checkpoint(self._knobs.key)

    def _writable_session(self) -> DesignSession:
        if self.session is not None:
            return self.session
        if self.demo_copy_dir is None:
            raise StageledgerError(f"{self.source} is open read-only")
        copy = _free_name(pathlib.Path(self.demo_copy_dir) / pathlib.Path(self.source).name)
        try:
            atomic_write(str(copy), pathlib.Path(self.source).read_bytes(), None, create=True)
        except OSError as err:
            raise StageledgerError(f"cannot read the bundled demo {self.source}: {err.strerror}") from None
        self.session = DesignSession(str(copy))
        self.notify(f"saved a copy of the demo as {visible(str(copy))}", title="demo copied", timeout=8, markup=False)
        return self.session

    # -- actions ----------------------------------------------------------------

    #: Every action by name for the command palette (Ctrl+P): its title, what
    #: it does (a verb first) with its keys, and the action.
    PALETTE = (
        ("Help", "List every key and what it does (F1)", "help"),
        ("Note for the next commit", "Write a note that the next logged change carries (F2 or Ctrl+N)", "note"),
        ("Show ledger / readout", "Switch between the Ledger and the Readout on a narrow screen (F3)",
         "toggle_ledger"),
        ("Show pictures / next picture", "Show the pictures, then step to the next: Bode, noise, load lines "
         "(q2's too), transfer, spread, knob effects (F6)", "picture"),
        ("Next spread figure", "Show the spread of the next figure, the design's specs first (Ctrl+G)",
         "spread_figure"),
        ("Pin or unpin the baseline", "Pin the committed design as it is now to compare against, or unpin it (F4)",
         "baseline"),
        ("Switch the preferred series", f"Make the next of {SERIES_CYCLE_TEXT} the series values step along, a logged "
         "change; a file's E6 or E48 goes on to the next of these (F5)", "cycle_series"),
        ("Abandon", "Drop this row's pending value, or on a row with none the whole candidate (Esc or F9)",
         "abandon"),
        ("Undo", "Undo the last change, logged as a new entry (F7 or Ctrl+Z)", "undo"),
        ("Redo", "Redo the last undone change, logged as a new entry (F8 or Ctrl+Y)", "redo"),
        ("Aim the knob at a target", "Set the knob under the cursor so that FIGURE=TARGET holds, "
         "as a candidate (Ctrl+T)", "aim"),
        ("Options for a target", "List every usual way to reach FIGURE=TARGET, cheapest first (Ctrl+O)", "options"),
        ("Change the topology", "Rebuild the design as one of the seven stages, logged; shared keys keep "
         "their values (Ctrl+R)", "topology"),
        ("Quit", "Quit the workbench; every commit is already saved (F10 or Ctrl+Q)", "quit"),
    )

    def get_system_commands(self, screen):
        # Ours, and of Textual's only the two that apply here, in our words:
        # its key panel would be a second help, and maximising the one-line
        # editor shows nothing more.
        for title, text, action in self.PALETTE:
            yield SystemCommand(title, text, getattr(self, "action_" + action))
        yield SystemCommand("Theme", "Change the colours (ansi-dark and ansi-light follow the terminal's own)",
                            self.action_change_theme)
        yield SystemCommand("Screenshot", "Save the screen as an SVG file in the current folder",
                            lambda: self.set_timer(0.1, self.deliver_screenshot))

    # Tab and Shift+Tab from the readout or the ledger: entering the Knobs
    # forward lands on the first row, backward on the last, as a focus
    # chain would if every row were a widget of its own.
    def action_focus_next(self) -> None:
        super().action_focus_next()
        self._entered_knobs(first=True)

    def action_focus_previous(self) -> None:
        super().action_focus_previous()
        self._entered_knobs(first=False)

    def _entered_knobs(self, first: bool) -> None:
        knobs = self._knobs
        if self.screen is self._home and self.focused is knobs.editor:
            knobs.select(knobs.keys[0] if first else knobs.keys[-1])
            self.state.checkpoint(knobs.key)
            self._knob_changed()

    def action_abandon(self) -> None:
        self.on_knob_abandoned(KnobAbandoned(self._knobs.key))

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def action_note(self) -> None:
        if isinstance(self.screen, NotePrompt):
            return  # F2 inside the prompt (priority keys reach the app there too)
        def keep(text: str | None) -> None:
            if text is not None:
                self.note = text
                self._say(f'note for the next logged change: "{visible(text)}"' if text else "note cleared")

        self.push_screen(NotePrompt(self.note), keep)

    def action_toggle_ledger(self) -> None:
        # The size classes (-narrow/-wide) live on the screen, so these do too.
        self._home.remove_class("-show-pictures")
        self._home.toggle_class("-show-ledger")
        # The status line follows the region on show, or it would still be
        # talking about the pictures the ledger just replaced.
        if not self._home.has_class("-narrow"):
            self._say("the ledger is always beside the readout at this width; Tab reaches its entries")
        elif self._home.has_class("-show-ledger"):
            self._say("ledger: Tab to an entry, Enter pins it as the baseline; F3 back to the readout")
        else:
            self._say("readout (F3 the ledger, F6 the pictures)")

    def action_baseline(self) -> None:
        self._apply(self.state.toggle_baseline())

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        number = int(event.option.id.split("-")[1])
        self._apply(self.state.pin(number, ledger.replay(self.history, number)))

    def action_topology(self) -> None:
        if self.screen is not self._home:
            return  # Ctrl+R inside a dialog (priority keys reach the app there too)
        current = self.design.topology

        def chosen(topology: str | None) -> None:
            if topology is None:
                return
            if topology == self.design.topology:
                self._say(f"already {with_article(topology)}: nothing to change")
                return
            self._commit(self.state.switch_topology(topology))

        self.push_screen(TopologyDialog(current), chosen)

    def action_cycle_series(self) -> None:
        self._commit(self.state.next_series())

    def action_undo(self) -> None:
        self._commit(self.state.undo())

    def action_redo(self) -> None:
        self._commit(self.state.redo())

    def run(self, *args, **kwargs):
        result = super().run(*args, **kwargs)
        if self.return_code:  # 1: Textual stopped on an unhandled exception
            fault = getattr(self, "_exception", None)  # private: only to name it
            raise WorkbenchFault("the workbench stopped" + (
                f" on {type(fault).__name__}: {fault}" if fault is not None else "")) from fault
        return result

    def on_unmount(self) -> None:
        if self.session is not None:
            self.session.close()


def _path_last(text: str, path: str) -> str:
    """An error that opens with the file's path, the path moved to its end:
    the reason comes first, and the header already names the file."""
    prefix = f"{path}: "
    return f"{text.removeprefix(prefix)} ({path})" if text.startswith(prefix) else text


#: Header columns that are not the sub-title's: its icon (8), the space kept
#: for a clock (10) and "stageledger — " before the sub-title.
HEADER_ROOM = 8 + 10 + len("stageledger — ")


#: Rows the status line may take; beyond them its end is cut, with "…".
STATUS_ROWS = 2


def status_lines(text: str, width: int) -> list[str]:
    """``text`` wrapped at spaces into at most STATUS_ROWS lines of ``width``
    cells; later lines are indented under the first word after "✗ ".  The
    messages put what is wrong and the limit first, so a cut loses the least."""
    width = max(width, 10)
    indent = "  " if text.startswith("✗ ") else ""
    lines = textwrap.wrap(text, width, subsequent_indent=indent, break_on_hyphens=False) or [""]
    lines = [_cut(line, width) for line in lines]
    if len(lines) > STATUS_ROWS:
        last = lines[STATUS_ROWS - 1].removesuffix("…")
        while cell_len(last + " …") > width:  # whole words off, so no word is left half
            last = last.rsplit(" ", 1)[0] if " " in last.strip() else last[:-1]
        lines = lines[:STATUS_ROWS - 1] + [last.rstrip() + " …"]
    return lines


def _cut(line: str, width: int) -> str:
    """``line`` within ``width`` cells (a wide character counts two), with "…" if cut."""
    if cell_len(line) <= width:
        return line
    while line and cell_len(line) > width - 1:
        line = line[:-1]
    return line + "…"


def fit_where(path: str, tags: tuple, width: int) -> str:
    """``path`` and the first of ``tags`` (longest first) that fits in ``width``
    cells, with the folder shortened from its start ("…/demos/x.toml") if need
    be: how the file is open tells more than where it is.  The file name
    always stays whole: it is what tells one design from another."""
    folder, slash, name = path.rpartition("/")
    for tag in tags:
        if cell_len(f"{path} {tag}".strip()) <= width:
            return f"{path} {tag}".strip()
        if slash and cell_len(f"…/{name} {tag}".strip()) <= width:
            break
    else:
        return f"{'…/' if slash else ''}{name} {tags[-1]}".strip()
    # Whole folders from the end, as many as fit.
    kept = ""
    for part in reversed(folder.split("/")):
        if cell_len(f"…/{part}{kept}/{name} {tag}".strip()) > width:
            break
        kept = f"/{part}{kept}"
    return f"…{kept}/{name} {tag}".strip()


def _free_name(path: pathlib.Path) -> pathlib.Path:
    """``path``, or ``name-2.toml``, ``name-3.toml``… if it is taken."""
    if not os.path.lexists(path):
        return path
    n = 2
    while os.path.lexists(path.with_name(f"{path.stem}-{n}{path.suffix}")):
        n += 1
    return path.with_name(f"{path.stem}-{n}{path.suffix}")
