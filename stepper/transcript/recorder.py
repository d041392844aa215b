"""Recording a Python prover in-process: :class:`Recorder` and :func:`tap`.

:class:`Recorder` is a thin, typed face over :class:`stepper.transcript.store.TranscriptWriter`:
one method per event type, each building the event payload, validating it
through the writer's :class:`stepper.transcript.events.Sequencer` (order rules, canonical
elements) and writing it to disk at once, flushed. Values may be Python ints,
numpy integers or arrays, galois elements, or k-tuples / lists for an
extension field. A clean exit from the ``with`` block seals the transcript;
an exception leaves it unsealed (read back as "incomplete"), with every event
written before it intact.

:func:`tap` records an *unmodified* prover: it replaces, on the prover's own
Fiat-Shamir channel object, the methods the prover already calls to send a
round polynomial and to draw a challenge (names given by the caller) with
wrappers that call the original and record what went through. The prover's
behaviour is unchanged; :meth:`Tap.untap` restores the originals.
"""

from __future__ import annotations

import os
from types import TracebackType
from typing import Any, Callable, Iterable, Mapping, Sequence

from stepper.errors import UsageError, Where
from stepper.field.field import Field
from stepper.transcript.jsonl import oversized_integer
from stepper.transcript.store import TranscriptWriter
from stepper.transcript.model import (
    BatchDecl,
    BucketStats,
    ChallengeMsg,
    Event,
    FieldDecl,
    FinalValue,
    InstanceStart,
    NamedValue,
    Note,
    Opening,
    RoundMsg,
    ScheduleDecl,
    Squeeze,
)

__all__ = ["Recorder", "Tap", "tap"]


def _element(value: Any) -> Any:
    """A value as the event payload wants it: int, or list of ints for an extension."""
    if isinstance(value, (int, str)):
        return value
    if isinstance(value, (tuple, list)):
        return [_element(v) for v in value]
    tolist = getattr(value, "tolist", None)
    if tolist is not None:  # numpy scalars and arrays, galois elements
        return _element(tolist())
    return int(value)


def _glue_value(value: Any) -> Any:
    """A value or squeeze as the payload wants it: a list stays a list of elements, so
    in an extension field each element of a point must itself be a list or tuple."""
    tolist = getattr(value, "tolist", None)
    if tolist is not None:
        value = tolist()
    return _element(value)


def _elements(values: Any) -> list[Any]:
    tolist = getattr(values, "tolist", None)
    if tolist is not None:
        values = tolist()
    return [_element(v) for v in values]


class Recorder:
    """Writes a transcript from inside a prover, one validated event per call."""

    def __init__(self, path: str | os.PathLike[str], *, field: Field | str | int | None = None,
                 metadata: Mapping[str, Any] | None = None, replace: bool = False) -> None:
        """Start recording into ``path``. An existing file there is left as it was and the
        call raises :class:`~stepper.transcript.store.output.OutputExists` (a
        :class:`~stepper.errors.UsageError`), unless ``replace`` is true."""
        meta = {"recorded_by": "stepper.recorder", **dict(metadata or {})}
        self._writer = TranscriptWriter(path, metadata=meta, replace=replace, replace_hint="replace=True")
        if field is not None:
            self.field(field)

    @property
    def path(self) -> str:
        return self._writer.path

    @property
    def events(self) -> int:
        """Events written so far."""
        return self._writer.events

    @property
    def awaiting_challenge(self) -> bool:
        """Whether the last round sent still waits for its challenge."""
        return self._writer.awaiting_challenge

    def _write(self, payload: dict[str, Any]) -> Event:
        try:
            return self._writer.write_payload(payload)
        except OverflowError:  # a free-form integer (extra bucket key, schedule parameter) past msgpack's range
            raise oversized_integer(Where(file=self.path, event=self.events - 1)) from None

    # ----- one method per event type -------------------------------------------------
    def field(self, field: Field | str | int, extension_degree: int = 1,
              irreducible: Sequence[int] | None = None) -> FieldDecl:
        """The field: a :class:`Field`, a name (``goldilocks`` ...) or a prime modulus."""
        if isinstance(field, Field):
            payload: dict[str, Any] = {"type": "field", **field.spec()}
        else:
            payload = {"type": "field", ("name" if isinstance(field, str) else "modulus"): field}
            if extension_degree != 1:
                payload["extension_degree"] = extension_degree
            if irreducible is not None:
                payload["irreducible"] = list(irreducible)
        return self._write(payload)  # type: ignore[return-value]

    def schedule(self, name: str, label: str = "", params: Mapping[str, Any] | None = None) -> ScheduleDecl:
        """How the challenges are derived (a schedule of :mod:`stepper.verify.fiatshamir`)."""
        payload: dict[str, Any] = {"type": "schedule", "name": name, "label": label}
        if params:
            payload["params"] = dict(params)
        return self._write(payload)  # type: ignore[return-value]

    def batch(self, coefficient: Any, terms: Iterable[Any], sources: Sequence[str] = ()) -> BatchDecl:
        """The next instance's claim is sum_i coefficient^i * terms[i]."""
        payload = {"type": "batch", "coefficient": _element(coefficient), "terms": _elements(terms)}
        if sources:
            payload["sources"] = list(sources)
        return self._write(payload)  # type: ignore[return-value]

    def instance(self, name: str, num_vars: int, degree: int, claim: Any, *, order: str = "low-first",
                 form: str = "evals", claim_expr: str | None = None, final_expr: str | None = None,
                 eq_point: Any = None) -> InstanceStart:
        """Start a sumcheck instance; ``claim_expr`` / ``final_expr`` tie it to the glue,
        ``eq_point`` (a list, or the name of a list value or squeeze) goes with form eq-factored."""
        payload: dict[str, Any] = {"type": "instance", "name": name, "num_vars": int(num_vars),
                                   "degree": int(degree), "claim": _element(claim), "order": order, "form": form}
        if claim_expr is not None:
            payload["claim_expr"] = claim_expr
        if final_expr is not None:
            payload["final_expr"] = final_expr
        if eq_point is not None:
            payload["eq_point"] = eq_point if isinstance(eq_point, str) else _elements(eq_point)
        return self._write(payload)  # type: ignore[return-value]

    def value(self, name: str, v: Any) -> NamedValue:
        """A named public value: one element, or a list of them (a point)."""
        return self._write({"type": "value", "name": name, "value": _glue_value(v)})  # type: ignore[return-value]

    def squeeze(self, name: str, v: Any) -> Squeeze:
        """Named verifier randomness drawn outside the rounds: one element or a list."""
        return self._write({"type": "squeeze", "name": name, "value": _glue_value(v)})  # type: ignore[return-value]

    def opening(self, name: str, v: Any, table: str | None = None) -> Opening:
        """The claimed value of table ``table`` (default ``name``) at the last instance's point."""
        payload: dict[str, Any] = {"type": "opening", "name": name, "value": _element(v)}
        if table is not None:
            payload["table"] = table
        return self._write(payload)  # type: ignore[return-value]

    def round(self, values: Any) -> RoundMsg:
        """The round polynomial as sent, in the instance's form (g(0), g(1), ... by default)."""
        return self._write({"type": "round", "evals": _elements(values)})  # type: ignore[return-value]

    def challenge(self, value: Any) -> ChallengeMsg:
        """The verifier's challenge for the round just sent."""
        return self._write({"type": "challenge", "value": _element(value)})  # type: ignore[return-value]

    def final(self, value: Any) -> FinalValue:
        """The oracle's value of the summed polynomial at the challenge point."""
        return self._write({"type": "final", "value": _element(value)})  # type: ignore[return-value]

    def buckets(self, round: int, chunk: int, count: int, sizes: Iterable[int] | None = None, *,
                bound_log2: int | None = None, remaining: int | None = None, **extra: Any) -> BucketStats:
        """Bucket occupancy of a bucketing prover for one round and chunk."""
        payload: dict[str, Any] = {"type": "buckets", "round": int(round), "chunk": int(chunk), "count": int(count),
                                   **extra}
        if sizes is not None:
            payload["sizes"] = [int(s) for s in _elements(sizes)]
        if bound_log2 is not None:
            payload["bound_log2"] = int(bound_log2)
        if remaining is not None:
            payload["remaining"] = int(remaining)
        return self._write(payload)  # type: ignore[return-value]

    def note(self, text: str, instance: int | str | None = None, round: int | None = None) -> Note:
        """Free text, about the current instance unless another is named."""
        payload: dict[str, Any] = {"type": "note", "text": text}
        if instance is not None:
            payload["instance"] = instance
        if round is not None:
            payload["round"] = round
        return self._write(payload)  # type: ignore[return-value]

    # ----- life cycle ------------------------------------------------------------------
    def finish(self) -> None:
        """Seal the transcript (end event with the digest) and close it."""
        self._writer.finish()

    def close(self) -> None:
        """Close without sealing (the transcript reads as incomplete)."""
        self._writer.close()

    def __enter__(self) -> Recorder:
        return self

    def __exit__(self, kind: type[BaseException] | None, err: BaseException | None, tb: TracebackType | None) -> None:
        if kind is None:
            self.finish()
        else:
            self.close()


class Tap:
    """The wrappers :func:`tap` put on a channel; ``untap()`` (or leaving the
    ``with`` block) puts the original methods back."""

    def __init__(self, channel: Any, recorder: Recorder) -> None:
        self.channel = channel
        self.recorder = recorder
        self.sent = 0
        self.drawn = 0
        self.off_round_draws = 0
        self.glue = 0  # values, squeezes and openings recorded
        self._saved: list[tuple[str, bool, Any]] = []  # (name, was an instance attribute, old value)

    def _wrap(self, name: str, make: Callable[[Callable[..., Any]], Callable[..., Any]]) -> None:
        original = getattr(self.channel, name, None)
        if not callable(original):
            raise UsageError(f"expected the channel to have a method {name!r}, found "
                             f"{'none' if original is None else type(original).__name__}")
        own = vars(self.channel).get(name) if hasattr(self.channel, "__dict__") else None
        try:
            setattr(self.channel, name, make(original))
        except (AttributeError, TypeError):
            raise UsageError(f"expected a channel whose method {name!r} can be replaced, found a "
                             f"{type(self.channel).__name__} that refuses it (slots or read-only)") from None
        self._saved.append((name, own is not None, own))

    def untap(self) -> None:
        for name, was_own, old in reversed(self._saved):
            if was_own:
                setattr(self.channel, name, old)
            else:
                delattr(self.channel, name)
        self._saved.clear()

    def __enter__(self) -> Tap:
        return self

    def __exit__(self, kind: type[BaseException] | None, err: BaseException | None, tb: TracebackType | None) -> None:
        self.untap()


def tap(channel: Any, recorder: Recorder, *, send: str | Sequence[str], draw: str | Sequence[str],
        values: Callable[..., Any] | None = None, challenge: Callable[[Any], Any] | None = None,
        value: str | None = None, squeeze: str | None = None, opening: str | None = None) -> Tap:
    """Record the rounds and challenges that pass through ``channel``.

    ``send`` names the method(s) the prover calls with a round polynomial;
    ``values(*args, **kwargs)`` picks the polynomial's values out of that call
    (default: the first argument). ``draw`` names the method(s) that return a
    challenge; ``challenge(result)`` turns the result into a field element
    (default: the result itself). A draw made while no round waits for its
    challenge (a batching coefficient, say) is not a round challenge: it is kept
    as a note, so nothing is lost. Start the instance with ``recorder.instance``
    before the prover runs.

    The glue passes through the same way: ``value``, ``squeeze`` and ``opening``
    name the channel's methods called as ``(name, v)`` (``opening`` also with an
    optional ``table``) that announce a public value, return a squeezed value, and
    send an opening; each call is recorded with the recorder's method of that name
    (a squeeze records what the method returned)."""
    pick = values or (lambda *args, **kwargs: args[0])
    convert = challenge or (lambda result: result)
    hooks = Tap(channel, recorder)

    def make_send(original: Callable[..., Any]) -> Callable[..., Any]:
        def sent(*args: Any, **kwargs: Any) -> Any:
            result = original(*args, **kwargs)
            recorder.round(pick(*args, **kwargs))
            hooks.sent += 1
            return result
        return sent

    def make_draw(original: Callable[..., Any]) -> Callable[..., Any]:
        def drawn(*args: Any, **kwargs: Any) -> Any:
            result = original(*args, **kwargs)
            value = convert(result)
            if recorder.awaiting_challenge:
                recorder.challenge(value)
                hooks.drawn += 1
            else:
                recorder.note(f"value drawn outside a round: {_element(value)}")
                hooks.off_round_draws += 1
            return result
        return drawn

    def make_glue(kind: str) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
        def make(original: Callable[..., Any]) -> Callable[..., Any]:
            def passed(name: str, *args: Any, **kwargs: Any) -> Any:
                result = original(name, *args, **kwargs)
                if kind == "squeeze":
                    recorder.squeeze(name, result)
                elif kind == "value":
                    recorder.value(name, args[0] if args else kwargs["v"])
                else:
                    table = args[1] if len(args) > 1 else kwargs.get("table")
                    recorder.opening(name, args[0] if args else kwargs["v"], table)
                hooks.glue += 1
                return result
            return passed
        return make

    for kind, method in (("value", value), ("squeeze", squeeze), ("opening", opening)):
        if method is not None:
            hooks._wrap(method, make_glue(kind))
    for name in [send] if isinstance(send, str) else send:
        hooks._wrap(name, make_send)
    for name in [draw] if isinstance(draw, str) else draw:
        hooks._wrap(name, make_draw)
    return hooks
