"""The one error tree of stepper.

Every failure that a user can cause is a :class:`StepperError`; its subclass
says whose fault it was and so which exit code the CLI returns:

* :class:`InputError` (exit 2): a file or value could not be used (unreadable,
  malformed, hostile, unknown field, non-canonical element ...).
* :class:`UsageError` (exit 2): the command line itself is wrong.
* :class:`InternalError` (exit 70): a bug in stepper; the message asks for a report.

A rejected proof is *not* an error: the verifier returns it as a result.
Messages follow one pattern: what was expected, what was found, and where
(file, byte offset or line, event, instance, round), built by :class:`Where`.
Lower libraries' exceptions (msgpack, json, OS) are converted where they enter.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = [
    "EXIT_OK",
    "EXIT_REJECT",
    "EXIT_INPUT",
    "EXIT_INCOMPLETE",
    "EXIT_INTERNAL",
    "EXIT_INTERRUPTED",
    "Where",
    "StepperError",
    "InputError",
    "FieldError",
    "TranscriptError",
    "WitnessError",
    "ExpressionError",
    "UsageError",
    "InternalError",
]

EXIT_OK = 0
EXIT_REJECT = 1
EXIT_INPUT = 2
EXIT_INCOMPLETE = 3
EXIT_INTERNAL = 70
EXIT_INTERRUPTED = 130


@dataclass(frozen=True, slots=True)
class Where:
    """A location inside some input, every part optional."""

    file: str | None = None
    offset: int | None = None
    line: int | None = None
    event: int | None = None
    instance: str | int | None = None
    round: int | None = None

    def but(self, **changes: object) -> Where:
        """A copy with some parts replaced."""
        return replace(self, **changes)  # type: ignore[arg-type]

    def __str__(self) -> str:
        parts: list[str] = []
        if self.file is not None:
            parts.append(self.file)
        if self.line is not None:
            parts.append(f"line {self.line}")
        if self.offset is not None:
            parts.append(f"byte {self.offset}")
        if self.event is not None:
            parts.append(f"event {self.event}")
        if self.instance is not None:
            label = f"'{self.instance}'" if isinstance(self.instance, str) else str(self.instance)
            parts.append(f"instance {label}")
        if self.round is not None:
            parts.append(f"round {self.round}")
        return ", ".join(parts)


class StepperError(Exception):
    """Root of every error stepper raises on purpose."""

    exit_code: int = EXIT_INPUT

    def __init__(self, message: str, where: Where | None = None) -> None:
        self.message = message
        self.where = where if where is not None else Where()
        super().__init__(self.__str__())

    def at(self, **changes: object) -> StepperError:
        """The same error with more location filled in (keeps the class)."""
        return type(self)(self.message, self.where.but(**changes))

    def __str__(self) -> str:
        place = str(self.where)
        return f"{place}: {self.message}" if place else self.message


class InputError(StepperError):
    """An input (file, value, flag argument) could not be used."""


class FieldError(InputError):
    """An unknown field, a bad modulus or polynomial, or a non-canonical element."""


class TranscriptError(InputError):
    """A transcript or event file is malformed, hostile or corrupt."""


class WitnessError(InputError):
    """A witness file does not fit the transcript it is given with."""


class ExpressionError(WitnessError):
    """A `combine` expression does not parse; `column` is 0-based."""

    def __init__(self, message: str, text: str = "", column: int = 0, where: Where | None = None) -> None:
        self.text = text
        self.column = column
        super().__init__(message, where)

    def at(self, **changes: object) -> StepperError:
        return ExpressionError(self.message, self.text, self.column, self.where.but(**changes))

    def pointer(self) -> str:
        """The expression with a caret under the offending character."""
        return f"{self.text}\n{' ' * self.column}^"


class UsageError(StepperError):
    """The command line is wrong (unknown flag, missing argument)."""


class InternalError(StepperError):
    """A bug in stepper itself."""

    exit_code = EXIT_INTERNAL
