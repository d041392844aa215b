"""Seed inputs and structure-aware mutators for bench/fuzz.py.

Seeds are small proofs made by stepper's own reference provers in several fields
(prime fields of 31, 64 and 254 bits, an extension), each with its witness and its
JSON-lines export. Mutators know the formats: a transcript is decoded into its
msgpack objects, one event is changed and the end event's count and SHA-256 are
recomputed, so the change reaches the verifier's checks instead of stopping at the
digest; JSON-lines streams and witness maps are changed value by value; combine
expressions are generated from their grammar and mangled; plug-in answers are drawn
from a list of wrong types and sizes. Every mutator takes a ``random.Random`` so a
run is reproducible from its seed.
"""

from __future__ import annotations

import hashlib
import io
import json
import random
import re
from dataclasses import dataclass, field
from typing import Any, Callable

import msgpack

MAGIC = b"stepper:sumcheck\n"  # transcripts/FORMAT.md


@dataclass
class Seed:
    """One proof: transcript bytes, its JSON-lines export, its witness (JSON text), its field modulus."""

    name: str
    transcript: bytes
    jsonl: bytes
    witness: bytes
    p: int


@dataclass
class Case:
    """One fuzz input: files by role ('transcript', 'other', 'witness', 'plugin-answer'), and how it was made."""

    kind: str
    files: dict[str, bytes] = field(default_factory=dict)
    how: str = ""


# ----- seeds ------------------------------------------------------------------------------------
SEED_SPECS = (  # (kind, field, num_vars, form, fault)
    ("generic", "babybear", 3, "evals", None),
    ("zerocheck", "goldilocks", 3, "evals-no-1", None),
    ("generic", "bn254", 2, "coeffs", None),
    ("generic", "babybear^4", 2, "evals", None),
    ("perm-grouped", "mersenne31", 3, "evals", None),
    ("generic", "koalabear", 3, "coeffs-no-linear", "montgomery@2"),
    ("ferries", "babybear", 3, "evals", None),
)


def build_seeds() -> list[Seed]:
    """Every seed proof, made in memory by the reference provers (fixed seeds: same bytes each run)."""
    import os
    import tempfile

    from stepper.cli.export_cmd import _export
    from stepper.provers.engine import witness_payload
    from stepper.provers.faults import parse_fault
    from stepper.provers.reference import ProveSpec, parse_field, prove
    from stepper.transcript.store import TranscriptWriter

    seeds = []
    with tempfile.TemporaryDirectory(prefix="stepper-fuzz-seeds-") as scratch:
        for i, (kind, field_text, mu, form, fault) in enumerate(SEED_SPECS):
            field_ = parse_field(field_text)
            spec = ProveSpec(kind, mu, 7 + i, 2, None, parse_fault(fault) if fault else None, "low-first", form,
                             None, None, f"fuzz seed {i}")
            path = os.path.join(scratch, f"seed{i}.sumtr")
            with TranscriptWriter(path, metadata={"created": "fixed", "label": f"fuzz seed {i}"}) as writer:
                proof = prove(spec, field_, writer)
            out = io.StringIO()
            _export(path, out)
            witness = json.dumps(witness_payload(field_, proof.witness)).encode()
            with open(path, "rb") as handle:
                seeds.append(Seed(f"{kind}-{field_text}-{form}", handle.read(), out.getvalue().encode(), witness,
                                  field_.p))
        seeds.append(_glue_seed(scratch))
    return seeds


def _glue_seed(scratch: str) -> Seed:
    """A GKR product circuit: layers linked through named values, squeezes and openings (the glue events)."""
    import os

    import numpy as np

    from stepper.cli.export_cmd import _export
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.engine import witness_payload
    from stepper.provers.gkr import prove_grand_product
    from stepper.provers.reference import parse_field
    from stepper.transcript.store import TranscriptWriter

    field_ = parse_field("babybear")
    path = os.path.join(scratch, "gkr.sumtr")
    table = field_.base.vrandom(8, np.random.default_rng(5))
    with TranscriptWriter(path, metadata={"created": "fixed", "label": "fuzz seed gkr"}) as writer:
        proof = prove_grand_product(ProofChannel(field_, writer, label="fuzz gkr"), MulCounter(field_), table)
    out = io.StringIO()
    _export(path, out)
    with open(path, "rb") as handle:
        return Seed("gkr-babybear", handle.read(), out.getvalue().encode(),
                    json.dumps(witness_payload(field_, proof.witness)).encode(), field_.p)


# ----- values -------------------------------------------------------------------------------------
def interesting(rng: random.Random, p: int, *, json_ok: bool) -> Any:
    """A value likely to break a reader: edges of the field and of msgpack, wrong types, big or deep things."""
    choices: list[Callable[[], Any]] = [
        lambda: 0, lambda: 1, lambda: -1, lambda: p, lambda: p - 1, lambda: p + 1, lambda: 2**63, lambda: 2**64 - 1,
        lambda: -(2**63), lambda: rng.randrange(1 << 70) if json_ok else rng.randrange(1 << 64),
        lambda: "", lambda: str(p), lambda: hex(p - 1), lambda: "0x", lambda: "-0", lambda: " 12", lambda: "1e3",
        lambda: "x" * rng.choice((1, 70, 70000)), lambda: "\u00e9\u2603\U0001f6a2", lambda: None, lambda: True,
        lambda: 1.5, lambda: float("nan") if not json_ok else 1e308, lambda: [], lambda: {}, lambda: [1, [2, [3]]],
        lambda: {"type": "note"}, lambda: [0] * rng.choice((2, 17, 5000)), lambda: ["1"] * rng.choice((3, 65537)),
        lambda: nested(rng.choice((10, 200, 3000))) if not json_ok else Deep(rng.choice((10, 200, 3000, 100_000))),
    ]
    if json_ok:
        choices += [lambda: 10**rng.choice((20, 80, 400, 4000)), lambda: "9" * 5000]  # 4300 digits: int->str cap
    else:
        choices += [lambda: b"", lambda: b"\xff" * rng.choice((1, 4, 8, 32, 33)), lambda: bytes(rng.randrange(256)
                                                                                            for _ in range(12))]
    return rng.choice(choices)()


@dataclass(frozen=True)
class Deep:
    """Lists nested ``depth`` deep, for JSON text (json.dumps itself recurses; see :func:`dumps`)."""

    depth: int


def dumps(value: Any) -> str:
    """``json.dumps`` that writes :class:`Deep` values as text."""
    deep: list[Deep] = []

    def mark(obj: Any) -> Any:
        if isinstance(obj, Deep):
            deep.append(obj)
            return f"@@deep{len(deep) - 1}@@"
        raise TypeError(type(obj).__name__)

    text = json.dumps(value, default=mark)
    for i, d in enumerate(deep):
        text = text.replace(f'"@@deep{i}@@"', "[" * d.depth + "1" + "]" * d.depth)
    return text


def nested(depth: int) -> Any:
    value: Any = 1
    for _ in range(depth):
        value = [value]
    return value


def mutate_value(rng: random.Random, value: Any, p: int, *, json_ok: bool, depth: int = 0) -> Any:
    """``value`` with one thing changed somewhere inside it (maps and lists are walked into)."""
    if isinstance(value, dict) and value and depth < 6 and rng.random() < 0.8:
        key = rng.choice(list(value))
        out = dict(value)
        roll = rng.random()
        if roll < 0.12:
            del out[key]
        elif roll < 0.2:
            out[rng.choice(("type", "extra", "round", "instance", "name", "form", "evals", "claim"))] = \
                interesting(rng, p, json_ok=json_ok)
        elif roll < 0.28 and key == "type":
            out[key] = rng.choice(("field", "schedule", "instance", "round", "challenge", "final", "batch", "note",
                                   "buckets", "end", "header", "value", "squeeze", "opening", "zz"))
        elif key in ("claim_expr", "final_expr", "combine") and roll < 0.6:
            glue = ["product.c1", "product.outputs[0]", "product.r1", "product.v2.lo", "eq(product.r1)",
                    "point(product.layer1)", "final(product.layer1)", "nosuch[3]"]
            out[key] = expression(rng, glue)
        else:
            out[key] = mutate_value(rng, value[key], p, json_ok=json_ok, depth=depth + 1)
        return out
    if isinstance(value, list) and value and depth < 6 and rng.random() < 0.8:
        out_list = list(value)
        i = rng.randrange(len(out_list))
        roll = rng.random()
        if roll < 0.15:
            del out_list[i]
        elif roll < 0.25:
            out_list.insert(i, out_list[i])
        else:
            out_list[i] = mutate_value(rng, out_list[i], p, json_ok=json_ok, depth=depth + 1)
        return out_list
    if isinstance(value, (bytes, bytearray)) and value and rng.random() < 0.7:
        data = bytearray(value)
        roll = rng.random()
        if roll < 0.5:
            data[rng.randrange(len(data))] = rng.randrange(256)
        elif roll < 0.75:
            del data[rng.randrange(len(data)):]
        else:
            data += bytes([0xff]) * rng.randrange(1, 9)
        return bytes(data)
    if isinstance(value, int) and not isinstance(value, bool) and rng.random() < 0.5:
        return rng.choice((value + 1, value - 1, value + p, value * 2, -value, value ^ 1))
    return interesting(rng, p, json_ok=json_ok)


# ----- bytes ----------------------------------------------------------------------------------------
def mutate_bytes(rng: random.Random, data: bytes) -> tuple[bytes, str]:
    roll = rng.random()
    if roll < 0.3:
        cut = rng.randrange(len(data) + 1)
        return data[:cut], f"cut at byte {cut}"
    buf = bytearray(data)
    if roll < 0.7:
        for _ in range(rng.randint(1, 4)):
            buf[rng.randrange(len(buf))] = rng.randrange(256)
        return bytes(buf), "bytes flipped"
    if roll < 0.85:
        a = rng.randrange(len(buf))
        b = min(len(buf), a + rng.randint(1, 64))
        return bytes(buf[:a] + buf[a:b] * rng.randint(2, 3) + buf[b:]), "slice repeated"
    a = rng.randrange(len(buf))
    return bytes(buf[:a] + buf[a + rng.randint(1, 64):]), "slice removed"


# ----- transcripts: one event changed, digest recomputed ---------------------------------------------
def split_transcript(data: bytes) -> tuple[Any, Any, list[Any], list[Any]]:
    """(version, header, events before end, objects after end) of a well-formed transcript."""
    unpacker = msgpack.Unpacker(raw=False, strict_map_key=False)
    unpacker.feed(data[len(MAGIC):])
    objects = list(unpacker)
    version, header, rest = objects[0], objects[1], objects[2:]
    end = next(i for i, o in enumerate(rest) if isinstance(o, dict) and o.get("type") == "end")
    return version, header, rest[:end], rest[end + 1:]


def seal(version: Any, header: Any, events: list[Any], after: list[Any]) -> bytes:
    """A transcript of these objects with a correct end event (count and SHA-256)."""
    pack = msgpack.Packer(use_bin_type=True)
    body = MAGIC + pack.pack(version) + pack.pack(header) + b"".join(pack.pack(e) for e in events)
    end = {"type": "end", "events": len(events), "sha256": hashlib.sha256(body).digest()}
    return body + pack.pack(end) + b"".join(pack.pack(o) for o in after)


def mutate_events(rng: random.Random, seed: Seed) -> tuple[bytes, str]:
    version, header, events, after = split_transcript(seed.transcript)
    roll = rng.random()
    if roll < 0.6 and events:
        i = rng.randrange(len(events))
        events[i] = mutate_value(rng, events[i], seed.p, json_ok=False)
        how = f"event {i} changed"
    elif roll < 0.7 and events:
        i = rng.randrange(len(events))
        del events[i]
        how = f"event {i} removed"
    elif roll < 0.8 and events:
        i = rng.randrange(len(events))
        events.insert(rng.randrange(len(events) + 1), events[i])
        how = f"event {i} repeated"
    elif roll < 0.87 and len(events) > 1:
        i = rng.randrange(len(events) - 1)
        events[i], events[i + 1] = events[i + 1], events[i]
        how = f"events {i} and {i + 1} swapped"
    elif roll < 0.94:
        header = mutate_value(rng, header, seed.p, json_ok=False)
        how = "header changed"
    else:
        after.append(mutate_value(rng, {"type": "note", "text": "n", "instance": 0, "round": 1}, seed.p,
                                  json_ok=False))
        how = "note appended after the end"
    try:
        return seal(version, header, events, after), how + ", digest recomputed"
    except (OverflowError, TypeError, ValueError):
        return seed.transcript, "unchanged (the mutation could not be packed)"


# ----- JSON lines --------------------------------------------------------------------------------------
def mutate_jsonl(rng: random.Random, seed: Seed) -> tuple[bytes, str]:
    lines = seed.jsonl.decode().splitlines()
    roll = rng.random()
    i = rng.randrange(len(lines))
    if roll < 0.55:
        try:
            value = json.loads(lines[i])
        except ValueError:
            value = lines[i]
        lines[i] = dumps(mutate_value(rng, value, seed.p, json_ok=True))
        how = f"line {i + 1} changed"
    elif roll < 0.65:
        del lines[i]
        how = f"line {i + 1} removed"
    elif roll < 0.75:
        lines.insert(i, lines[i])
        how = f"line {i + 1} repeated"
    elif roll < 0.8:
        lines[i] = lines[i][: rng.randrange(len(lines[i]) + 1)]
        how = f"line {i + 1} cut"
    elif roll < 0.85:
        digits = rng.choice(("9" * 5000, "1" + "0" * 400, "-" + "7" * 30, "1e999", "NaN", "0x10"))
        lines[i] = re.sub(r"\d+", digits, lines[i], count=1)
        how = f"line {i + 1}: a number replaced by {digits[:12]}..."
    else:
        data, how = mutate_bytes(rng, seed.jsonl)
        return data, how
    text = "\n".join(lines) + ("\n" if rng.random() < 0.9 else "")
    return text.encode("utf-8", "surrogatepass"), how


# ----- witnesses and expressions --------------------------------------------------------------------------
def mutate_witness(rng: random.Random, seed: Seed) -> tuple[bytes, str]:
    raw = json.loads(seed.witness)
    roll = rng.random()
    if roll < 0.55:
        raw = mutate_value(rng, raw, seed.p, json_ok=True)
        how = "witness value changed"
    elif roll < 0.75 and isinstance(raw, dict):
        for inst in raw.get("instances", []):
            if isinstance(inst, dict) and rng.random() < 0.7:
                inst["combine"] = expression(rng, list(inst.get("tables", {}) or ["t"]))
        how = "combine replaced"
    elif roll < 0.85:
        data, how = mutate_bytes(rng, seed.witness)
        return data, "witness " + how
    elif roll < 0.9:  # tables long enough for the JSON reader's whole-array path, then bytes changed
        data, how = mutate_bytes(rng, _long_tables(raw))
        return data, "long-table witness " + how
    else:
        depth = rng.choice((33, 1000, 100_000))
        return b'{"instances": ' + b"[" * depth + b"]" * depth + b"}", f"nested {depth} deep"
    if rng.random() < 0.2:
        try:
            return msgpack.packb(raw, use_bin_type=True), how + " (msgpack)"
        except (OverflowError, TypeError, ValueError):  # a Deep value, or an int msgpack cannot hold
            pass
    return dumps(raw).encode(), how


def _long_tables(raw: Any) -> bytes:
    """The witness with every table repeated past stepper.diagnose.witness_json.MIN_BYTES of text."""
    for inst in raw.get("instances", []) if isinstance(raw, dict) else []:
        tables = inst.get("tables") if isinstance(inst, dict) else None
        for name, table in (tables.items() if isinstance(tables, dict) else []):
            if isinstance(table, list) and table:
                tables[name] = table * (1 + 70_000 // len(json.dumps(table)))
    return json.dumps(raw, separators=(",", ":")).encode()


def expression(rng: random.Random, names: list[str], depth: int = 0) -> str:
    """A combine expression from the grammar, now and then mangled (unbalanced, huge, foreign tokens)."""
    roll = rng.random()
    if depth > 4 or roll < 0.3:
        atom = rng.choice([*names, *names, str(rng.randrange(10)), str(rng.choice((2**64, 10**80))), "nosuch"])
        text = atom
    elif roll < 0.45:
        text = rng.choice(("-", "(", "")) + expression(rng, names, depth + 1) + rng.choice(("", ")", ""))
    elif roll < 0.55:
        text = f"{expression(rng, names, depth + 1)}^{rng.choice((0, 1, 2, 3, 64, 10**6, 10**30))}"
    else:
        op = rng.choice(("+", "-", "*", "*", " ", "/", "**", ","))
        text = f"{expression(rng, names, depth + 1)} {op} {expression(rng, names, depth + 1)}"
    if depth == 0 and rng.random() < 0.15:
        text = rng.choice(("(" * 300 + text + ")" * 300, text * 200, "-" * 500 + text, text + "\x00", "\u00e9" + text,
                           "__import__('os')", "eval(1)"))
    return text


# ----- plug-in answers ------------------------------------------------------------------------------------
PLUGIN = '''"""A challenge plug-in whose answers the fuzz harness chooses (answer.json beside it)."""
import json, os, time
_HERE = os.path.dirname(os.path.abspath(__file__))
def derive(history):
    mode = json.load(open(os.path.join(_HERE, "answer.json")))
    kind, value = mode["kind"], mode.get("value")
    if kind == "raise":
        raise RuntimeError("the plug-in gave up")
    if kind == "hang":
        time.sleep(3600)
    if kind == "exit":
        raise SystemExit(3)
    if kind == "interrupt":
        raise KeyboardInterrupt
    if kind == "object":
        return object()
    if kind == "generator":
        return (x for x in [1])
    if kind == "huge":
        return 10 ** value
    if kind == "negative-huge":
        return -(10 ** value)
    if kind == "deep":
        out = 1
        for _ in range(value):
            out = [out]
        return out
    if kind == "float":
        return 1.5
    if kind == "numpy":
        import numpy
        return numpy.uint64(value)
    return value
'''


def plugin_answer(rng: random.Random, p: int) -> tuple[bytes, str]:
    kind = rng.choice(("raise", "hang", "object", "generator", "huge", "negative-huge", "deep", "float", "numpy",
                       "value", "value", "value", "exit", "interrupt"))
    value: Any = None
    if kind in ("huge", "negative-huge"):
        value = rng.choice((5, 30, 80, 5000, 100_000))
    elif kind == "deep":
        value = rng.choice((2, 4, 100, 5000))
    elif kind == "numpy":
        value = rng.choice((0, 1, p - 1))
    elif kind == "value":
        value = interesting(rng, p, json_ok=True)
    answer = {"kind": kind, "value": value}
    return dumps(answer).encode(), f"plug-in answer {kind}" + (f" {str(value)[:30]}" if value is not None else "")
