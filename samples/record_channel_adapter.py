"""Record an existing, unmodified Python prover by tapping its Fiat-Shamir channel.

Scenario (invented demo data): Brackwater Ferries' car deck has 8 slot records
for sailing isle-of-quill-0740; each must be well formed: its occupancy flag
b is 0 or 1, so b * (1 - b) = 0 on every slot. The operator's prover shows it
with a zero-check: sum_x eq(z, x) * b(x) * (1 - b(x)) = 0 for a random z
(degree 3), binding the low index bit first.

`DeckProver` and `DeckChannel` below stand for code you already have: the
prover calls `channel.absorb_poly(evals)` for each round polynomial and
`channel.squeeze()` for each challenge, with a channel of its own design.
`stepper.transcript.recorder.tap` wraps those two methods on the channel object, so the
prover runs unchanged while every round and challenge lands in the transcript:

    python samples/record_channel_adapter.py deck.sumtr
    stepper check deck.sumtr

The channel's challenges are not stepper's built-in schedule, so `check`
verifies sums, degrees and the final value but does not re-derive the
challenges (declare a schedule, or pass `--challenges`, for that).
"""

from __future__ import annotations

import hashlib
import sys

from stepper.errors import StepperError
from stepper.transcript.recorder import Recorder, tap

P = 2**64 - 2**32 + 1  # Goldilocks
NUM_VARS = 3


class DeckChannel:
    """The prover's own Fiat-Shamir channel (stands in for existing code)."""

    def __init__(self, label: bytes) -> None:
        self.state = hashlib.sha256(label)

    def absorb_poly(self, evals: list[int]) -> None:
        for v in evals:
            self.state.update(v.to_bytes(8, "little"))

    def squeeze(self) -> int:
        digest = self.state.digest()
        self.state.update(b"squeezed")
        return int.from_bytes(digest[:16], "little") % P


class DeckProver:
    """An existing zero-check prover over plain Python ints (tiny tables only)."""

    def __init__(self, slots: list[int], z: list[int]) -> None:
        self.flags = list(slots)
        self.eq = []  # eq(z, x) with x_(j+1) = bit j of the index
        for i in range(1 << len(z)):
            e = 1
            for j, zj in enumerate(z):
                e = e * (zj if (i >> j) & 1 else 1 - zj) % P
            self.eq.append(e)

    def claim(self) -> int:
        return sum(e * b * (1 - b) for e, b in zip(self.eq, self.flags)) % P

    def run(self, channel: DeckChannel) -> int:
        eq, flags = self.eq, self.flags
        for _ in range(NUM_VARS):
            evals = []
            for t in range(4):  # degree 3: g(0), g(1), g(2), g(3)
                total = 0
                for i in range(0, len(eq), 2):
                    e = (eq[i] + t * (eq[i + 1] - eq[i])) % P
                    b = (flags[i] + t * (flags[i + 1] - flags[i])) % P
                    total += e * b * (1 - b)
                evals.append(total % P)
            channel.absorb_poly(evals)
            r = channel.squeeze()
            eq = [(eq[i] + r * (eq[i + 1] - eq[i])) % P for i in range(0, len(eq), 2)]
            flags = [(flags[i] + r * (flags[i + 1] - flags[i])) % P for i in range(0, len(flags), 2)]
        return eq[0] * flags[0] * (1 - flags[0]) % P


def main(path: str, replace: bool = False) -> None:
    slots = [1, 0, 1, 1, 0, 0, 1, 0]  # car-deck slot occupancy flags, all well formed
    prover = DeckProver(slots, z=[11, 22, 33])
    channel = DeckChannel(b"brackwater-ferries/deck")
    with Recorder(path, field="goldilocks", metadata={"sailing": "isle-of-quill-0740"}, replace=replace) as rec:
        rec.instance("deck-slots-zero", NUM_VARS, 3, prover.claim())
        with tap(channel, rec, send="absorb_poly", draw="squeeze") as hooks:
            final = prover.run(channel)  # the prover itself is not changed
        rec.final(final)
    print(f"{path}: {hooks.sent} rounds and {hooks.drawn} challenges recorded from the prover's own channel")


if __name__ == "__main__":
    if sys.argv[1:2] in (["-h"], ["--help"]):  # not an output path
        print(__doc__)
        sys.exit(0)
    words = [w for w in sys.argv[1:] if w != "--force"]
    try:
        main(words[0] if words else "deck-slots.sumtr", replace="--force" in sys.argv[1:])
    except StepperError as err:  # an existing output without --force: one line, exit 2
        print(f"record_channel_adapter: {err}".replace("replace=True", "--force"), file=sys.stderr)  # this script's flag
        sys.exit(2)
