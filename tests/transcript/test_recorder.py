"""The in-process Recorder and the channel tap: what a prover sends is what the file holds."""

from __future__ import annotations

import hashlib

import numpy as np
import pytest

from stepper.errors import TranscriptError, UsageError
from stepper.transcript.recorder import Recorder, tap
from stepper.transcript.store import load, open_events
from stepper.transcript.model import BucketStats, Note

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source


def test_every_call_is_on_disk_before_the_next(tmp_path):
    path = tmp_path / "live.sumtr"
    rec = Recorder(path, field="goldilocks", metadata={"sailing": "isle-of-quill-0740"})
    rec.instance("boarding-permutation", 2, 2, 5)
    rec.round([1, 4, 9])
    # Read while the recorder is still open: the round is already there.
    transcript = load(path)
    assert transcript.completeness == "incomplete"
    assert transcript.instances[0].rounds[0].values == (1, 4, 9)
    rec.challenge(np.uint64(3))
    rec.close()
    assert load(path).instances[0].rounds[0].challenge == 3


def test_clean_exit_seals_and_an_exception_leaves_a_readable_prefix(tmp_path):
    sealed = tmp_path / "sealed.sumtr"
    with Recorder(sealed, field="babybear") as rec:
        rec.instance("deck-slots-zero", 1, 1, 7)
        rec.round([3, 4])
        rec.challenge(5)
        rec.final(8)
    t = load(sealed)
    assert (t.completeness, t.digest) == ("complete", "verified")
    assert t.instances[0].final == 8

    broken = tmp_path / "broken.sumtr"
    with pytest.raises(RuntimeError):
        with Recorder(broken, field="babybear") as rec:
            rec.instance("deck-slots-zero", 2, 1, 7)
            rec.round([3, 4])
            raise RuntimeError("prover crashed")
    t = load(broken)
    assert (t.completeness, t.digest) == ("incomplete", "missing")
    assert t.instances[0].rounds[0].values == (3, 4)


def test_values_from_numpy_arrays_and_extension_tuples(tmp_path):
    path = tmp_path / "ext.sumtr"
    with Recorder(path, field="babybear") as rec:
        rec.instance("boarding-permutation", 1, 1, 7)
        rec.round(np.array([3, 4], dtype=np.uint64))
        rec.challenge(5)
    assert load(path).instances[0].rounds[0].values == (3, 4)

    path = tmp_path / "ext4.sumtr"
    with Recorder(path, metadata={"label": "quartic"}) as rec:
        rec.field("babybear", extension_degree=4)
        rec.instance("boarding-permutation", 1, 1, (7, 0, 0, 0))
        rec.round([(3, 1, 0, 0), (4, BABYBEAR - 1, 0, 0)])
        rec.challenge((5, 6, 7, 8))
    t = load(path)
    assert t.field.degree == 4
    assert t.instances[0].rounds[0].values == ((3, 1, 0, 0), (4, BABYBEAR - 1, 0, 0))
    assert t.instances[0].rounds[0].challenge == (5, 6, 7, 8)


def test_bad_calls_raise_and_leave_what_was_written(tmp_path):
    path = tmp_path / "bad.sumtr"
    rec = Recorder(path, field="goldilocks")
    rec.instance("boarding-permutation", 1, 2, 0)
    with pytest.raises(TranscriptError, match="canonical"):
        rec.round([GOLDILOCKS, 0, 0])
    with pytest.raises(TranscriptError, match="round before its challenge"):
        rec.challenge(1)
    rec.round([0, 0, 0])
    with pytest.raises(TranscriptError, match="challenge of round 1 before another round"):
        rec.round([0, 0, 0])
    rec.close()
    assert len(load(path).instances[0].rounds) == 1


def test_buckets_schedule_batch_and_notes_are_recorded(tmp_path):
    path = tmp_path / "all.sumtr"
    with Recorder(path, field="goldilocks") as rec:
        rec.schedule("stepper-sha256/1", label="brackwater-ferries")
        rec.batch(3, [1, 2], sources=["ledger", "boarding"])
        rec.instance("boarding-permutation", 1, 1, 7)  # 1 + 3 * 2
        rec.buckets(1, 0, 4, sizes=[1, 0, 2, 1], bound_log2=2, remaining=2, gate="B")
        rec.round([3, 4])
        rec.challenge(2)
        rec.note("gate B counted twice", round=1)
    t = load(path)
    assert t.schedule is not None and t.schedule.label == "brackwater-ferries"
    assert t.instances[0].start.batch is not None and t.instances[0].start.batch.terms == (1, 2)
    assert t.instances[0].buckets == (BucketStats(0, 1, 0, 4, (1, 0, 2, 1), 2, 2, {"gate": "B"}),)
    assert t.instances[0].notes == (Note("gate B counted twice", 0, 1),)


class ToyChannel:
    """A stand-in for a prover's existing Fiat-Shamir channel."""

    def __init__(self) -> None:
        self.state = hashlib.sha256(b"toy")
        self.log: list[str] = []

    def send_poly(self, evals: list[int], tag: str = "") -> None:
        self.log.append(f"sent {tag}")
        for v in evals:
            self.state.update(v.to_bytes(8, "little"))

    def draw(self) -> int:
        self.log.append("drew")
        return int.from_bytes(self.state.digest()[:7], "little")


def test_tap_records_rounds_and_challenges_without_changing_the_prover(tmp_path):
    path = tmp_path / "tap.sumtr"
    plain = ToyChannel()
    drawn_plain = []
    for k in range(3):
        plain.send_poly([k, k + 1], tag=str(k))
        drawn_plain.append(plain.draw())

    channel = ToyChannel()
    drawn = []
    with Recorder(path, field="goldilocks") as rec:
        rec.instance("deck-slots-zero", 3, 1, 1)
        with tap(channel, rec, send="send_poly", draw="draw") as hooks:
            for k in range(3):
                channel.send_poly([k, k + 1], tag=str(k))
                drawn.append(channel.draw())
        assert (hooks.sent, hooks.drawn) == (3, 3)
    assert drawn == drawn_plain and channel.log == plain.log
    assert "send_poly" not in vars(channel)  # untapped: the class method is back
    rounds = load(path).instances[0].rounds
    assert [r.values for r in rounds] == [(0, 1), (1, 2), (2, 3)]
    assert [r.challenge for r in rounds] == drawn


def test_tap_keeps_a_draw_outside_a_round_as_a_note(tmp_path):
    path = tmp_path / "tap.sumtr"
    channel = ToyChannel()
    with Recorder(path, field="goldilocks") as rec:
        rec.instance("deck-slots-zero", 1, 1, 1)
        with tap(channel, rec, send="send_poly", draw="draw",
                 values=lambda evals, tag="": evals[:2]) as hooks:
            batching = channel.draw()
            channel.send_poly([0, 1, 99])
            channel.draw()
        assert hooks.off_round_draws == 1
    t = load(path)
    assert t.instances[0].notes[0].text == f"value drawn outside a round: {batching}"
    assert t.instances[0].rounds[0].values == (0, 1)


def test_tap_names_a_method_the_channel_lacks(tmp_path):
    with Recorder(tmp_path / "x.sumtr", field="goldilocks") as rec:
        with pytest.raises(UsageError, match="method 'absorb'"):
            tap(ToyChannel(), rec, send="absorb", draw="draw")


def test_records_returned_match_the_records_read_back(tmp_path):
    path = tmp_path / "same.sumtr"
    written = []
    with Recorder(path, field="goldilocks") as rec:
        written.append(rec.instance("boarding-permutation", 1, 2, 10))
        written.append(rec.round([4, 6, 1]))
        written.append(rec.challenge(9))
    with open_events(path) as stream:
        read = list(stream)[1:]
    assert read == written


def test_an_extra_integer_past_msgpack_range_is_a_transcript_error_not_an_overflow(tmp_path):
    # msgpack integers stop at 2^64 (msgpack specification, "int format family")
    path = tmp_path / "deck.sumtr"
    with pytest.raises(TranscriptError, match="as a decimal string"):
        with Recorder(path, field="babybear") as rec:
            rec.instance("deck-slots-zero", 2, 2, 0)
            rec.buckets(1, 0, 1, camera_frame=2**70)
    assert len(load(path).instances) == 1


def test_the_glue_calls_write_values_squeezes_openings_and_the_instance_keys(tmp_path):
    from stepper.transcript.model import NamedValue, Opening, Squeeze

    path = tmp_path / "glue.stp"
    with Recorder(path, field="goldilocks") as rec:
        rec.value("tau", np.array([1, 2], dtype=np.uint64))
        rec.squeeze("alpha", 7)
        rec.instance("zc", 1, 2, 0, final_expr="a * alpha",
                     claim_expr="alpha - 7")
        rec.round([0, 0, 0])
        rec.challenge(3)
        rec.opening("a", 5)
        rec.opening("b.at.r", 6, table="b")
    t = load(path)
    assert t.header.format_version == 2
    assert t.glue == (NamedValue("tau", (1, 2), True, None), Squeeze("alpha", 7, False, None))
    inst = t.instances[0]
    assert inst.start.final_expr == "a * alpha" and inst.start.claim_expr == "alpha - 7"
    assert inst.openings == (Opening("a", 5, "a", 0), Opening("b.at.r", 6, "b", 0))


def test_tap_passes_the_channels_glue_calls_through(tmp_path):
    class Channel:
        def __init__(self):
            self.seen = []

        def publish(self, name, v):
            self.seen.append(name)

        def coin(self, name, count=None):
            return 11

        def reveal(self, name, v, table=None):
            self.seen.append(name)

        def send(self, evals):
            pass

        def draw(self):
            return 4

    path = tmp_path / "tapped.stp"
    channel = Channel()
    with Recorder(path, field="goldilocks") as rec:
        with tap(channel, rec, send="send", draw="draw", value="publish", squeeze="coin", opening="reveal") as hooks:
            channel.publish("tau", [5])
            assert channel.coin("beta") == 11
            rec.instance("zc", 1, 1, 0)
            channel.send([0, 0])
            channel.draw()
            channel.reveal("a", 9, table="fares")
        assert hooks.glue == 3
    t = load(path)
    assert [g.name for g in t.glue] == ["tau", "beta"] and t.glue[1].value == 11
    assert t.instances[0].openings[0].table == "fares" and channel.seen == ["tau", "a"]


def test_the_recorder_leaves_an_existing_file_as_it_was_unless_asked_to_replace_it(tmp_path):
    from stepper.errors import UsageError

    path = tmp_path / "quill.sumtr"
    path.write_bytes(b"a teammate's notes")
    with pytest.raises(UsageError, match=r"already exists; it was left as it was \(add replace=True"):
        Recorder(path, field="goldilocks")
    assert path.read_bytes() == b"a teammate's notes"
    with Recorder(path, field="goldilocks", replace=True) as rec:
        rec.instance("boarding-permutation", 0, 1, 0)
    assert load(path).instances[0].name == "boarding-permutation"
