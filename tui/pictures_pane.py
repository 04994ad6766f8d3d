"""The workbench's Pictures: which picture is on show, and the worker that
builds and draws it (a mixin of :class:`~tui.app.Workbench`; which design
and figures are on show is the editing state's ``on_show``).

The knob effects follow the knob under the cursor as well as the design:
the worker computes the design's sensitivity matrix once (kept for the
next knob) and writes that knob's row as text."""

from __future__ import annotations

from textual import work
from textual.widgets import Static

from model.advisor.sensitivity import sensitivity_matrix
from model.analyses.figures import Figures
from model.design.stage import Design

from .chart import render_stack
from .messages import PictureReady
from .minus_sign import minus_signs
from .pictures import KNOB_EFFECTS, LOAD_LINES, PICTURES, SPREAD, charts_for, pictures_for
from .sensitivity_text import knob_effect_lines
from .spread_picture import figure_choices
from .widgets.picture import Picture, Rows


class PicturesPane:
    """Scheduling, drawing and showing the Pictures; F6 steps through them."""

    picture_kind = PICTURES[0]
    #: The figure the Spread picture shows (Ctrl+G steps through them).
    spread_key = "av_loaded"
    #: (design, kind, spread key or knob, size) last sent to the worker.
    _picture_asked: tuple | None = None
    #: (design, its Sensitivity) the knob effects last computed.
    _sensitivity: tuple | None = None

    def _pictures_visible(self) -> bool:
        """Always on a wide screen, beside the readout; on a narrow one after F6."""
        return not self._home.has_class("-narrow") or self._home.has_class("-show-pictures")

    def _schedule_picture(self, design: Design, figures: Figures) -> None:
        if self.picture_kind not in pictures_for(design):
            self.picture_kind = LOAD_LINES  # the follower's lines, and the stage has none now
        picture = self._home.query_one(Picture)
        hint = " · ^G figure" if self.picture_kind == SPREAD else ""
        self._home.query_one("#picture-title", Static).update(
            f"Pictures: {self.picture_kind} · F6 next{hint}", layout=False)
        size = (picture.size.width, picture.size.height)
        wanted = (design, self.picture_kind, self._picture_key(), size)
        if not self._pictures_visible() or self._picture_asked == wanted:
            return
        # Remembered when asked, not when drawn, so repeated refreshes while
        # one is being drawn do not start more.
        self._picture_asked = wanted
        self._draw_picture(design, figures, self.picture_kind, self._picture_key(), size)

    def _picture_key(self) -> str:
        """What the picture shows besides the design: the knob under the
        cursor for the knob effects, else the Spread picture's figure."""
        return self._knobs.key if self.picture_kind == KNOB_EFFECTS else self.spread_key

    def _knob_changed(self) -> None:
        """The cursor is on another knob: the knob effects follow it."""
        if self.picture_kind == KNOB_EFFECTS:
            self._refresh_picture()

    @work(thread=True, exclusive=True, exit_on_error=False, group="picture")
    def _draw_picture(self, design: Design, figures: Figures, kind: str, key: str, size: tuple) -> None:
        try:
            charts = self._knob_effects(design, key, size[1]) if kind == KNOB_EFFECTS \
                else charts_for(kind, design, figures, key)
        except Exception:  # noqa: BLE001 - a picture must never take the workbench down
            charts = ()
        if isinstance(charts, Rows):
            lines = charts.fit(*size)
        else:
            lines = render_stack(charts, *size) if charts and min(size) > 0 else None
        self.post_message(PictureReady(design, (kind, key), charts, (*size, lines) if lines else None))

    def _knob_effects(self, design: Design, knob: str, height: int) -> Rows:
        """The knob effects of ``knob`` (in the worker): the matrix is kept
        for the design, so moving to another knob only writes its row."""
        kept = self._sensitivity
        sens = kept[1] if kept is not None and kept[0] == design else sensitivity_matrix(design)
        self._sensitivity = (design, sens)
        # One minus sign in every picture, this table of text included.
        return Rows(tuple(minus_signs(line) for line in knob_effect_lines(sens, design, knob, height)))

    def on_picture_ready(self, message: PictureReady) -> None:
        if not self._in_service():
            return
        if message.design != self.state.on_show()[0] or message.kind != (self.picture_kind, self._picture_key()):
            # Dropped: if it was the one last asked for, asking again must
            # draw it, or the picture would keep an older design's figures
            # (a corner the Readout no longer shows) once that design is back.
            asked = self._picture_asked
            if asked is not None and (asked[0], asked[1:3]) == (message.design, message.kind):
                self._picture_asked = None
            return
        self._home.query_one(Picture).show(message.charts, message.rendered)

    def on_resize(self) -> None:
        self.call_after_refresh(self._refresh_picture)

    def _refresh_picture(self) -> None:
        if not self._in_service():
            return
        design, figures = self.state.on_show()
        if figures.large_signal:
            self._schedule_picture(design, figures)

    def action_picture(self) -> None:
        """Show the pictures (on a narrow screen), or step to the next one."""
        if self._home.has_class("-narrow") and not self._home.has_class("-show-pictures"):
            self._home.remove_class("-show-ledger")
            self._home.add_class("-show-pictures")
        else:
            kinds = pictures_for(self.state.on_show()[0])
            at = kinds.index(self.picture_kind) if self.picture_kind in kinds else kinds.index(LOAD_LINES)
            self.picture_kind = kinds[(at + 1) % len(kinds)]
        self._say(f"picture: {self.picture_kind} (F6 for the next)")
        self.call_after_refresh(self._refresh_picture)

    def action_spread_figure(self) -> None:
        """Step the Spread picture to the next figure (the design's specs first)."""
        choices = figure_choices(self.state.on_show()[0])
        at = choices.index(self.spread_key) if self.spread_key in choices else -1
        self.spread_key = choices[(at + 1) % len(choices)]
        if self.picture_kind != SPREAD:
            self.picture_kind = SPREAD
        self._say(f"picture: spread of {self.spread_key} (Ctrl+G for the next figure)")
        self.call_after_refresh(self._refresh_picture)
