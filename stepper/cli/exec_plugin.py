"""`--challenges-exec CMD`: a challenge plug-in in any language, as a child process speaking
JSON lines over its standard input and output.

stepper starts CMD once per checked file and writes one line per event the verifier absorbs,
``{"absorb": EVENT}`` (EVENT is the same plain map a Python plug-in sees), and, whenever a
challenge is needed, ``{"derive": {"type": "challenge", "instance": NAME, "index": I,
"round": K}}``, and before each squeeze event ``{"derive": {"type": "squeeze", "name": NAME,
"length": null or N}}``. The command answers each ``derive`` with exactly one line,
``{"value": ELEMENT}`` (an element as in the event stream: integer, decimal or 0x string, a
list for an extension; for a squeeze with a length, a list of N elements) or ``{"error": TEXT}``. When the check is done stepper closes the
command's standard input and waits briefly for it to exit. Its standard error passes through.

Failures are exit 2 with one line naming the command: it cannot start, exits or closes its
output early, answers with something that is not such a line, or takes longer than
``STEPPER_CHALLENGES_SECONDS`` (default 10) for an answer (it is then stopped).
"""

from __future__ import annotations

import json
import os
import selectors
import shlex
import subprocess
import time
import weakref
from typing import Any, Mapping

from stepper.errors import UsageError
from stepper.field.elements import clip_text
from stepper.verify.binding import PluginFailure
from stepper.verify.challenges import PLUGIN_SECONDS_ENV, guard_stateful, _seconds_from_environment
from stepper.verify.stateful import GuardedStateful

__all__ = ["ExecPlugin", "exec_challenger"]

_MAX_LINE = 1 << 20  # an answer longer than 1 MiB is not a challenge


def _stop(proc: subprocess.Popen[bytes]) -> None:
    if proc.poll() is None:
        try:
            if proc.stdin is not None:
                proc.stdin.close()
            proc.wait(timeout=1.0)
        except (OSError, subprocess.TimeoutExpired):
            proc.kill()
            proc.wait()
    for stream in (proc.stdin, proc.stdout):
        if stream is not None and not stream.closed:
            stream.close()


class ExecPlugin:
    """The child process behind ``--challenges-exec``: absorb and derive over a pipe."""

    def __init__(self, command: str, seconds: float | None = None) -> None:
        self.command = command
        self.seconds = _seconds_from_environment() if seconds is None else seconds
        try:
            argv = shlex.split(command)
        except ValueError as err:
            raise UsageError(f"expected --challenges-exec CMD to be a command line, found {command!r} ({err})") \
                from None
        if not argv:
            raise UsageError("expected --challenges-exec CMD to name a command, found an empty string")
        try:
            from stepper.cli.main import user_environment

            self.proc = subprocess.Popen(argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE, bufsize=0,
                                         env=user_environment())  # not stepper's own process settings
        except OSError as err:
            raise UsageError(f"expected --challenges-exec to start {command!r}, but it could not be started: "
                             f"{(err.strerror or str(err)).lower()}") from None
        self._finalizer = weakref.finalize(self, _stop, self.proc)
        self._buffer = b""

    def __repr__(self) -> str:
        return f"command {self.command!r}"

    def close(self) -> None:
        self._finalizer()

    def _gone(self, doing: str) -> PluginFailure:
        code = self.proc.poll()
        if code is None:
            try:
                code = self.proc.wait(timeout=0.5)
            except subprocess.TimeoutExpired:
                code = None
        status = "closed its output" if code is None else f"exited with code {code}"
        return PluginFailure(f"expected the challenge command {self.command!r} to {doing}, but it {status}")

    def _send(self, message: Mapping[str, Any], doing: str) -> None:
        assert self.proc.stdin is not None
        try:
            self.proc.stdin.write((json.dumps(message) + "\n").encode())
        except (BrokenPipeError, ValueError, OSError):
            raise self._gone(doing) from None

    def absorb(self, event: Mapping[str, Any]) -> None:
        self._send({"absorb": event}, f"read a {event.get('type')} event")

    def derive(self, request: Mapping[str, Any]) -> Any:
        self._send({"derive": request}, "answer a derive request")
        line = self._read_line()
        try:
            answer = json.loads(line)
        except (ValueError, RecursionError):
            raise PluginFailure(f"expected the challenge command {self.command!r} to answer "
                                f'{{"value": ...}} on one line, found {clip_text(line.decode(errors="replace"))!r}') \
                from None
        if isinstance(answer, dict) and isinstance(answer.get("error"), str) and "value" not in answer:
            raise PluginFailure(f"the challenge command {self.command!r} reported an error: "
                                f"{clip_text(answer['error'])}")
        if not isinstance(answer, dict) or "value" not in answer:
            raise PluginFailure(f"expected the challenge command {self.command!r} to answer "
                                f'{{"value": ...}}, found {clip_text(line.decode(errors="replace"))!r}')
        return answer["value"]

    def _read_line(self) -> bytes:
        assert self.proc.stdout is not None
        deadline = time.monotonic() + self.seconds if self.seconds > 0 else None
        fd = self.proc.stdout.fileno()
        with selectors.DefaultSelector() as selector:
            selector.register(fd, selectors.EVENT_READ)
            while b"\n" not in self._buffer:
                if len(self._buffer) > _MAX_LINE:
                    raise PluginFailure(f"expected the challenge command {self.command!r} to answer with a line "
                                        f"of at most {_MAX_LINE} bytes, found a longer one")
                left = None if deadline is None else deadline - time.monotonic()
                if left is not None and left <= 0:
                    self.close()
                    raise PluginFailure(f"expected the challenge command {self.command!r} to answer within "
                                        f"{self.seconds:g} s, found no answer (it was stopped; raise the limit "
                                        f"with {PLUGIN_SECONDS_ENV}=N)")
                if not selector.select(left):
                    continue
                chunk = os.read(fd, 65536)
                if not chunk:
                    raise self._gone("answer a derive request")
                self._buffer += chunk
        line, _, self._buffer = self._buffer.partition(b"\n")
        return line


def exec_challenger(command: str) -> GuardedStateful:
    """The running command, wrapped like an in-process stateful plug-in (it keeps its own
    time limit, so no second timer runs over it)."""
    plugin = ExecPlugin(command)
    return guard_stateful(plugin, f"command {command!r}", seconds=0)
