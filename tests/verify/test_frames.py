"""stepper.verify.frames builds, for many records at once, the frames the built-in schedules absorb.

Expected bytes are written out by hand from transcripts/FIAT-SHAMIR.md ("State and framing", "What is
absorbed, in order"): frame = u8(len(tag)) || tag || u64le(len(body)) || body. The framing is ours
(length-prefixed, domain-separated messages are common practice, no source).
"""

from __future__ import annotations

import pytest

from stepper.verify.frames import flat_glue_stream, frame, glue_stream, instance_frames, text, u64

SHAPE = text("low-first") + text("evals")


def by_hand(tag: bytes, body: bytes) -> bytes:
    return bytes([len(tag)]) + tag + len(body).to_bytes(8, "little") + body


def test_a_frame_is_the_tag_and_the_body_each_after_its_length():
    assert frame(b"draw", b"xy") == b"\x04draw" + b"\x02" + bytes(7) + b"xy"
    assert u64(258) == b"\x02\x01" + bytes(6)
    assert text("é") == b"\x02" + bytes(7) + b"\xc3\xa9"  # UTF-8 bytes, counted as bytes


def test_instance_frames_are_each_statement_framed_in_turn_with_where_each_ends():
    names, claims = ["boarding-permutation", "", "deck-ü"], (38).to_bytes(4, "little") + bytes(4) + b"\x01\x02\x03\x04"
    frames, ends = instance_frames(4, SHAPE, names, [2, 1, 7], [2, 0, 3], claims)
    expected = [by_hand(b"instance", u64(len(name.encode())) + name.encode() + u64(v) + u64(d) + SHAPE
                        + claims[4 * i:4 * i + 4])
                for i, (name, v, d) in enumerate(zip(names, [2, 1, 7], [2, 0, 3]))]
    assert frames == b"".join(expected)
    assert ends == [sum(map(len, expected[:i + 1])) for i in range(3)]
    with pytest.raises(ValueError, match="expected 3 claims of 4 bytes"):
        instance_frames(4, SHAPE, names, [2, 1, 7], [2, 0, 3], claims[:-1])


@pytest.mark.parametrize("names", [["sailing-07", "sailing-08", "sailing-09"], ["", "", ""], ["ü-1", "ab-2", "ä-3"],
                                   ["quay"], ["ab", "a\nb"[:2], "cd"], ["ab", "a\n", "cd"], ["ab", "abc", "de"]])
def test_instance_frames_of_names_of_one_length_are_the_same_bytes(names):
    # names of one length in bytes take the row-by-row build (non-ASCII counted in bytes; a newline inside a
    # name, or another length, the general one): the bytes are the same either way
    count = len(names)
    claims = b"".join((7 * i + 1).to_bytes(8, "little") for i in range(count))
    num_vars, degrees = [3 + i for i in range(count)], [2] * count
    frames, ends = instance_frames(8, SHAPE, names, num_vars, degrees, claims)
    expected = [by_hand(b"instance", u64(len(name.encode())) + name.encode() + u64(v) + u64(d) + SHAPE
                        + claims[8 * i:8 * i + 8]) for i, (name, v, d) in enumerate(zip(names, num_vars, degrees))]
    assert frames == b"".join(expected)
    assert ends == [sum(map(len, expected[:i + 1])) for i in range(count)]


def test_the_glue_stream_frames_values_openings_and_draws_and_marks_each_squeeze():
    head = by_hand(b"challenge", bytes(4))[:-4]  # a challenge frame's bytes before its element
    one, two = (5).to_bytes(4, "little"), (6).to_bytes(4, "little")
    stream, ends, cuts = glue_stream(4, head, ["value", "opening", "squeeze"], ["tau", "f.at.r", "w"],
                                     ["tau", "f", "w"], [one + two, one, one + two], [2, 1, 2], [True, False, True])
    value = by_hand(b"value", text("tau") + u64(1) + u64(2) + one + two)
    opening = by_hand(b"opening", text("f.at.r") + text("f") + one)
    draw = by_hand(b"draw", text("w") + u64(1) + u64(2))
    assert stream == value + opening + draw + head + one + head + two
    at = len(value + opening + draw)
    assert ends == [len(value), len(value + opening), len(stream)]
    assert cuts == [at, at + len(head) + 4]  # a challenge is squeezed before each challenge frame


def test_the_flat_glue_stream_is_the_glue_stream_of_one_element_each():
    import numpy as np

    head = by_hand(b"challenge", bytes(8))[:-8]
    kinds, names = ["value", "squeeze", "opening", "opening", "squeeze"], ["a", "beta.0", "c_1", "a", "zz"]
    data = [(7 * i + 1).to_bytes(8, "little") for i in range(5)]
    expected = glue_stream(8, head, kinds, names, names, data, [1] * 5, [False] * 5)
    codes = np.array([{"value": 0, "squeeze": 1, "opening": 2}[kind] for kind in kinds], dtype=np.int8)
    stream, ends, cuts = flat_glue_stream(codes, names, b"".join(data), 8, head)
    assert (stream, list(ends), list(cuts)) == (expected[0], list(expected[1]), list(expected[2]))


@pytest.mark.parametrize("broken", [None, "a longer name in one group", "another kind in one group",
                                    "longer names from the third group on", "a longer name in the last group"])
def test_the_flat_glue_stream_of_groups_alike_is_the_glue_stream_of_every_event(broken):
    """Events in groups of one shape (the glue after each run of a block) are framed from the first group's
    frames, each stretch of groups of one shape apart, a group alone the general way: the bytes, ends and
    cuts are the one-by-one glue_stream's either way."""
    import numpy as np

    head = by_hand(b"challenge", bytes(8))[:-8]
    shape = ["opening", "opening", "value", "squeeze"]
    kinds = shape * 6
    names = [name for i in range(10, 16) for name in (f"a{i}", f"b{i}", f"pub.{i}", f"beta{i}")]
    if broken == "a longer name in one group":
        names[9] = "b120"
    elif broken == "another kind in one group":
        kinds[14] = "value"
    elif broken == "longer names from the third group on":
        names[8:] = [name + "0" for name in names[8:]]
    elif broken == "a longer name in the last group":
        names[-1] = "beta.15"
    data = [(7 * i + 1).to_bytes(8, "little") for i in range(len(names))]
    expected = glue_stream(8, head, kinds, names, names, data, [1] * len(names), [False] * len(names))
    codes = np.array([{"value": 0, "squeeze": 1, "opening": 2}[kind] for kind in kinds], dtype=np.int8)
    stream, ends, cuts = flat_glue_stream(codes, names, b"".join(data), 8, head, period=4)
    assert (stream, list(ends), list(cuts)) == (expected[0], list(expected[1]), list(expected[2]))
    # the same with the names' lengths and bytes given (as the glue read from blobs hands them on)
    spelled = (np.array([len(name) for name in names]), "".join(name + "\n" for name in names).encode())
    given = flat_glue_stream(codes, names, b"".join(data), 8, head, 4, spelled)
    assert (given[0], list(given[1]), list(given[2])) == (expected[0], list(expected[1]), list(expected[2]))
