"""The workbench's advisor actions: aim the knob under the cursor at a
target (Ctrl+T), and the ways to a target (Ctrl+O).  Either result becomes
the candidate, as if its values had been typed into their rows, so it is
reviewed in the Readout and committed only by Enter."""

from __future__ import annotations

from textual import work

from model.advisor.aim import aim
from model.advisor.options import options
from model.advisor.search import parse_target
from model.errors import StageledgerError

from .advisor_screens import OptionsDialog, TargetPrompt
from .fieldtext import field_text
from .messages import OptionsReady
from .minus_sign import minus_signs
from .screens import NotePrompt


class AdvisorActions:
    """A mixin of the Workbench (it uses _knobs, _apply, _say, state)."""

    def _on_show_design(self):
        return self.state.candidate_design or self.state.design

    def action_aim(self) -> None:
        if isinstance(self.screen, NotePrompt):
            return
        key = self._knobs.key

        def run(text: str | None) -> None:
            if not text:
                return
            try:
                result = aim(self._on_show_design(), parse_target(text), vary=(key,))
                if not result.reached:
                    raise result.unreachable()
            except StageledgerError as err:
                self._say(str(err), error=True)
                return
            t = result.target
            values = result.changes(self._on_show_design())
            if not values:
                self._say(f"{key} is already the closest series value for {t.figure} at {t.words()}: "
                          f"{t.shown(result.chosen.figure)}")
                return
            self._take(values)
            self._say(f"aimed {t.figure} at {t.words()} by {key}: {t.shown(result.chosen.figure)} "
                      "(Enter commits, Esc drops)")

        self.push_screen(TargetPrompt(f"Aim by {key}: FIGURE=TARGET (Enter aims, Esc cancels)"), run)

    def action_options(self) -> None:
        if isinstance(self.screen, NotePrompt):
            return

        def run(text: str | None) -> None:
            if not text:
                return
            try:
                target = parse_target(text)
            except StageledgerError as err:
                self._say(str(err), error=True)
                return
            self._say(f"looking for ways to bring {target.figure} to {target.words()} …")
            self._find_options(self._on_show_design(), target)

        self.push_screen(TargetPrompt("Options for FIGURE=TARGET (Enter lists them, Esc cancels)"), run)

    @work(thread=True, exclusive=True, exit_on_error=False, group="options")
    def _find_options(self, design, target) -> None:
        try:
            ways = options(design, target)
        except StageledgerError as err:
            self.post_message(OptionsReady(design, target, None, str(err)))
            return
        self.post_message(OptionsReady(design, target, ways, ""))

    def on_options_ready(self, message: OptionsReady) -> None:
        if not self._in_service():
            return
        if message.ways is None:
            self._say(message.error, error=True)
            return
        if message.design != self._on_show_design():
            self._say("the design changed while the options were found; ask again", error=True)
            return
        reached = [o for o in message.ways if o.reached]
        lines = [minus_signs(f"{o.words(message.design)} (cost {o.cost:.2f})") for o in reached]
        why = [minus_signs(o.words(message.design)) for o in message.ways if not o.reached]
        t = message.target

        def chosen(index: int | None) -> None:
            if index is None:
                return
            way = reached[index]
            self._take(way.values)
            self._say(f"{way.name} for {t.figure} at {t.words()}: {t.shown(way.figure)} (Enter commits, Esc drops)")

        self._say(f"{len(reached)} ways to bring {t.figure} to {t.words()}" if reached
                  else f"no way reaches {t.figure} at {t.words()}", error=not reached)
        self.push_screen(OptionsDialog(f"Ways to {t.figure} = {t.words()}, cheapest first", lines, why), chosen)

    def _take(self, values: dict) -> None:
        """``values`` into their rows as if typed: the candidate, not committed."""
        for key, value in values.items():
            self._apply(self.state.edit(key, field_text(key, value)))
        self._show_knobs()
