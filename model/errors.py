"""The project's one small error hierarchy.

Every user mistake ends as one of these, so the command line can print one
line and exit with status 2, and the workbench can show it without a traceback.
"""

from __future__ import annotations


class StageledgerError(Exception):
    """Base of every error a user can cause; ``str()`` is the one-line message."""


class UnitError(StageledgerError, ValueError):
    """A value string that is not a number with an SI prefix or RKM code."""

    def __init__(self, text: object, reason: str):
        self.text = text
        self.reason = reason
        super().__init__(f"{text!r}: {reason}")


class DesignError(StageledgerError):
    """A design key with a value that breaks a rule.

    ``field`` is ``table.key`` (for example ``stage.rc``), ``value`` what was
    given and ``rule`` the limit it broke, in words.
    """

    def __init__(self, field: str, value: object, rule: str, path: str | None = None):
        self.field = field
        self.value = value
        self.rule = rule
        self.path = path
        where = f"{path}: " if path else ""
        super().__init__(f"{where}{field} = {value!r}: {rule}")

    def in_file(self, path: str) -> "DesignError":
        """The same error, naming the file it came from."""
        return DesignError(self.field, self.value, self.rule, path)


class DesignFileError(StageledgerError):
    """A design file that cannot be read or parsed at all."""

    def __init__(self, path: str, line: int | None, reason: str):
        self.path = path
        self.line = line
        self.reason = reason
        where = f"{path}:{line}" if line else str(path)
        super().__init__(f"{where}: {reason}")


class SolveError(StageledgerError):
    """A valid design whose operating point could not be found.

    ``fields`` names the design keys (``table.key``) the hint points at, if any.
    """

    def __init__(self, reason: str, hint: str = "", fields: tuple[str, ...] = ()):
        self.reason = reason
        self.hint = hint
        self.fields = tuple(fields)
        super().__init__(f"{reason}{' (' + hint + ')' if hint else ''}")
