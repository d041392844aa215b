"""stepper.transcript.packed.InstanceHead: an instance event found in a chunk's bytes reads back as
msgpack-python (the reference decoder, an outside implementation of the msgpack specification)
decodes the same bytes, for every name length a fixstr holds, with or without a claim_expr and a
final_expr of any str length, and anything packed otherwise (a longer name, another optional key,
counts past a positive fixint, another element width, bytes cut short) is left alone (None), so the
usual path decodes and judges it.
"""

from __future__ import annotations

import msgpack
import pytest

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.transcript.model import InstanceStart
from stepper.transcript.packed import InstanceHead
from stepper.transcript.payloads import to_payload

BN254 = get_field(NAMED_PRIMES["bn254"])
GOLDILOCKS = get_field(NAMED_PRIMES["goldilocks"])


def packed_instance(field, name: str, num_vars: int = 24, degree: int = 3, claim: int = 5, **keys) -> bytes:
    """The bytes the writer stores for an instance event (to_payload, then msgpack as the writer packs)."""
    start = InstanceStart(0, name, num_vars, degree, claim, **keys)
    return msgpack.packb(to_payload(start, field, binary=True, packed=True), use_bin_type=True)


@pytest.mark.parametrize("field", [GOLDILOCKS, BN254], ids=["goldilocks", "bn254"])
@pytest.mark.parametrize("length", [0, 1, 13, 31])
def test_a_writer_packed_instance_reads_as_msgpack_decodes_it(field, length):
    name = "ferry-sailing-0123456789abcdefghij"[:length]
    event = packed_instance(field, name, 17, 4, field.p - 1)
    data = b"\x01\x02" + event + b"\x82\xa4type"  # other bytes around it: found at its offset, ends where it ends
    found = InstanceHead(field.elem_bytes)(data, 2)
    reference = msgpack.unpackb(event, raw=False)
    assert found is not None
    end, name_bytes, num_vars, degree, claim, claim_expr, final_expr = found
    assert end == 2 + len(event) and claim_expr is None and final_expr is None
    assert (name_bytes.decode(), num_vars, degree, claim) == (reference["name"], reference["num_vars"],
                                                             reference["degree"], reference["claim"])
    assert set(reference) == {"type", "name", "num_vars", "degree", "claim"}


def test_non_ascii_names_are_found_as_their_utf8_bytes():
    event = packed_instance(GOLDILOCKS, "bÃ¥tsmann-Ã¸st")
    found = InstanceHead(8)(event, 0)
    assert found is not None and found[1].decode() == msgpack.unpackb(event, raw=False)["name"]


@pytest.mark.parametrize("keys", [{"claim_expr": "a0 + beta0*b0"}, {"final_expr": "eq(tau) * (a1*b1 - c1)"},
                                  {"claim_expr": "p" * 31, "final_expr": "q" * 32},  # a fixstr and a str 8
                                  {"claim_expr": "r" * 300, "final_expr": "\u00f8" * 40}])  # a str 16, UTF-8
def test_an_instance_with_its_glue_texts_reads_as_msgpack_decodes_it(keys):
    event = packed_instance(GOLDILOCKS, "sailing.7", claim_expr=keys.get("claim_expr"),
                            final_expr=keys.get("final_expr"))
    found = InstanceHead(8)(event + b"\x00", 0)
    reference = msgpack.unpackb(event, raw=False)
    assert found is not None
    end, name_bytes, num_vars, degree, claim, claim_expr, final_expr = found
    assert end == len(event)
    assert (name_bytes.decode(), num_vars, degree, claim) == (reference["name"], reference["num_vars"],
                                                             reference["degree"], reference["claim"])
    assert (None if claim_expr is None else claim_expr.decode()) == reference.get("claim_expr")
    assert (None if final_expr is None else final_expr.decode()) == reference.get("final_expr")


@pytest.mark.parametrize("case", ["name of 32 bytes", "order key", "form key", "num_vars 128", "degree 200",
                                  "other width", "cut short", "another event", "offset inside", "eq point",
                                  "texts swapped", "text cut short", "text not a str"])
def test_instances_packed_otherwise_are_left_to_the_usual_path(case):
    find = InstanceHead(8)
    event = {
        "name of 32 bytes": lambda: packed_instance(GOLDILOCKS, "x" * 32),  # str 8, not a fixstr
        "order key": lambda: packed_instance(GOLDILOCKS, "ferry", order="high-first"),
        "form key": lambda: packed_instance(GOLDILOCKS, "ferry", form="coeffs"),
        "num_vars 128": lambda: msgpack.packb({"type": "instance", "name": "ferry", "num_vars": 128, "degree": 3,
                                               "claim": bytes(8)}, use_bin_type=True),
        "degree 200": lambda: packed_instance(GOLDILOCKS, "ferry", degree=200),
        "other width": lambda: packed_instance(BN254, "ferry"),
        "cut short": lambda: packed_instance(GOLDILOCKS, "ferry")[:-1],
        "another event": lambda: msgpack.packb({"type": "note", "text": "ferry"}, use_bin_type=True),
        "offset inside": lambda: b"\x85" + packed_instance(GOLDILOCKS, "ferry"),
        "eq point": lambda: packed_instance(GOLDILOCKS, "ferry", form="eq-factored", eq_point="tau"),
        "texts swapped": lambda: msgpack.packb({"type": "instance", "name": "ferry", "num_vars": 2, "degree": 3,
                                                "claim": bytes(8), "final_expr": "a", "claim_expr": "b"},
                                               use_bin_type=True),
        "text cut short": lambda: packed_instance(GOLDILOCKS, "ferry", final_expr="a1 * b1")[:-2],
        "text not a str": lambda: msgpack.packb({"type": "instance", "name": "ferry", "num_vars": 2, "degree": 3,
                                                 "claim": bytes(8), "claim_expr": 7}, use_bin_type=True),
    }[case]()
    assert find(event, 0) is None


@pytest.mark.parametrize("keys", [{}, {"claim_expr": "a0 + beta0*b0"}, {"final_expr": "eq(tau) * (a1*b1 - c1)"},
                                  {"claim_expr": "p" * 31, "final_expr": "q" * 40},
                                  {"claim_expr": "r" * 300, "final_expr": "\u00f8" * 40}])
def test_instance_spans_hold_the_name_degree_claim_and_texts_msgpack_decodes(keys):
    # what may differ between instances laid out alike: the spans' bytes are exactly the values msgpack
    # decodes, and every other byte of the event is the same for another name, degree, claim and texts of
    # the same lengths
    from stepper.transcript.packed import instance_spans

    def event(name: str, degree: int, claim: int, text: str) -> bytes:
        texts = {key: value.replace(value[0], text) if value.isascii() else value for key, value in keys.items()}
        return packed_instance(GOLDILOCKS, name, 17, degree, claim, **texts)

    one, other = event("sailing.3", 4, 7, "z"), event("sailing.9", 2, GOLDILOCKS.p - 1, "y")
    found = InstanceHead(8)(one, 0)
    assert found is not None and found[0] == len(one) == len(other)
    spans = instance_spans(found, 0)
    reference = msgpack.unpackb(one, raw=False)
    expected = [reference["name"].encode(), bytes((reference["degree"],)), reference["claim"],
                *(reference[key].encode() for key in ("claim_expr", "final_expr") if key in reference)]
    assert [one[a:b] for a, b in spans] == expected
    differ = {i for a, b in spans for i in range(a, b)}
    assert all(one[i] == other[i] for i in range(len(one)) if i not in differ)
    assert any(one[i] != other[i] for i in differ)
