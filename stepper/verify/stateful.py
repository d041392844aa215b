"""Challenge plug-ins that keep their own state: an object with ``absorb(event)`` and
``derive(request)``.

A function plug-in (``derive(history)``) is handed the whole proof so far at every round; a
stateful one is handed each event once, in stream order, as the same plain maps (values and
openings included), and asked for a challenge when one is needed, with ``{"type": "challenge",
"instance": NAME, "index": I, "round": K}``, and for each squeeze before its event, with
``{"type": "squeeze", "name": NAME, "length": None}`` (one element) or ``"length": N`` (a list
of N). This is also the shape of an out-of-process plug-in (``--challenges-exec``),
whose pipe lives at the CLI edge. A stateful plug-in cannot be re-run on altered histories,
so the binding probe (which messages a challenge depends on) needs the function form.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping, Protocol

from stepper.errors import Where
from stepper.field.elements import clip_text
from stepper.verify.binding import PluginFailure, call_challenger, parse_answer

if TYPE_CHECKING:
    from stepper.field.field import Element, Field

__all__ = ["Stateful", "is_stateful", "GuardedStateful"]


class Stateful(Protocol):
    def absorb(self, event: Mapping[str, Any]) -> Any: ...

    def derive(self, request: Mapping[str, Any]) -> Any: ...


def is_stateful(obj: object) -> bool:
    """True for an object with callable ``absorb`` and ``derive`` (a class counts only once made)."""
    return (not isinstance(obj, type) and callable(getattr(obj, "absorb", None))
            and callable(getattr(obj, "derive", None)))


class GuardedStateful:
    """A stateful plug-in under the same guard as a function plug-in: a time limit per call
    (``seconds``; 0 for none) and every failure turned into one :class:`PluginFailure` naming
    the plug-in, the instance and the round."""

    def __init__(self, plugin: Any, label: str, absorb: Any, derive: Any) -> None:
        """``absorb`` and ``derive`` are the plug-in's methods already under a time limit
        (see :func:`stepper.verify.challenges.guard_stateful`)."""
        self.plugin = plugin
        self.label = label
        self._absorb = absorb
        self._derive = derive

    def __repr__(self) -> str:
        return self.label

    def absorb(self, event: Mapping[str, Any], where: Where) -> None:
        try:
            self._absorb(event)
        except PluginFailure as err:
            raise PluginFailure(err.message, where) from None
        except Exception as err:  # user code: its failure is input, not a bug in stepper
            raise PluginFailure(f"expected the challenge plug-in {self.label} to absorb a {event.get('type')} "
                                f"event, but it raised {type(err).__name__}: {clip_text(str(err))}", where) from None

    def derive(self, request: Mapping[str, Any], field: Field, where: Where) -> Element:
        return call_challenger(self._derive, request, field, where)  # type: ignore[arg-type]

    def derive_squeeze(self, name: str, length: int | None, field: Field,
                       where: Where) -> Element | tuple[Element, ...]:
        """The squeeze ``name``: one element (``length`` None) or a tuple of ``length``, asked
        for with ``{"type": "squeeze", "name": NAME, "length": N or None}``."""
        what = f"the squeeze '{name}'"
        try:
            raw = self._derive({"type": "squeeze", "name": name, "length": length})
        except PluginFailure as err:
            raise PluginFailure(f"{err.message} (deriving {what})", where) from None
        except Exception as err:  # user code: its failure is input, not a bug in stepper
            raise PluginFailure(f"expected the challenge plug-in {self.label} to return {what}, but it raised "
                                f"{type(err).__name__}: {clip_text(str(err))}", where) from None
        if length is None:
            return parse_answer(raw, field, self.label, where)
        if not isinstance(raw, (list, tuple)) or len(raw) != length:
            raise PluginFailure(f"expected the challenge plug-in {self.label} to return {what} as a list of "
                                f"{length} elements, found {clip_text(repr(raw))}", where)
        return tuple(parse_answer(v, field, self.label, where) for v in raw)
