"""`stepper compare A B [--json]`: the first divergence between two runs, and its kind.

Thin edge over :func:`stepper.compare.diff.compare`: loads both files (transcripts or
JSON-lines event files, complete or not), prints either a short explanation
with the divergence shown side by side, or the ``stepper-diff/1`` JSON object.
Exit 0 when identical, 1 when they differ, 2 when an input cannot be used.
"""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stepper.compare.diff import Comparison, InstancePair
    from stepper.field.field import Element, Field

HELP = "compare two runs: first divergence and its kind (Fiat-Shamir drift, prover arithmetic, ...)"
DESCRIPTION = (
    "Align the instances of A and B (by name, else by position) and their rounds, report the first element "
    "that differs and classify it: same polynomials with different challenges (Fiat-Shamir drift), a different "
    "polynomial after identical challenges (prover arithmetic), a constant factor such as a Montgomery radix, "
    "a step shifted by one round, reversed challenges, instances or claims in another order, different fields "
    "or encodings. Exit 0 identical, 1 different, 2 input error. Agreement between two runs says nothing "
    "about the soundness of either."
)

WINDOW = 1  # rounds shown before and after the divergent one


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("a", metavar="A", nargs="?", help="first transcript or JSON-lines event file")
    parser.add_argument("b", metavar="B", nargs="?", help="second transcript or JSON-lines event file")
    parser.add_argument("--json", action="store_true", help="print one JSON object (schema stepper-diff/1)")
    parser.add_argument("--schema", action="store_true", help="print the JSON Schema of --json output and exit")


def run(args: argparse.Namespace) -> int:
    from stepper.compare.diff import JSON_SCHEMA, compare
    from stepper.errors import UsageError
    from stepper.transcript.store import load

    if args.schema:
        import json

        json.dump(JSON_SCHEMA, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    if args.a is None or args.b is None:
        raise UsageError("expected two files A and B to compare, found " + ("none" if args.a is None else "one"))
    a, b = load(args.a), load(args.b)
    comparison = compare(a, b)
    if args.json:
        import json

        json.dump(comparison.to_json(args.a, args.b), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        sys.stdout.write("\n".join(render(comparison, args.a, args.b)) + "\n")
    return 0 if comparison.identical else 1


def render(c: Comparison, label_a: str, label_b: str) -> list[str]:
    """The human report: both sides, the divergence, its kind, the rounds around it."""
    from stepper.compare.diff import CAUTION

    def side(key: str, label: str, field: Field, completeness: str) -> str:
        count = sum(1 for p in c.pairs if getattr(p.pairing, key) is not None)
        return f"{key.upper()}  {label}  ({field.describe()}, {count} instance{'s' * (count != 1)}, {completeness})"

    lines = [side("a", label_a, c.field_a, c.completeness_a), side("b", label_b, c.field_b, c.completeness_b)]
    d = c.divergence
    if d is None:
        lines.append("identical: " + c.classification.explanation)
    else:
        lines.append(f"first divergence: {d.place()}")
        lines.append(f"  A  {d.a if d.a is not None else '(absent)'}")
        lines.append(f"  B  {d.b if d.b is not None else '(absent)'}")
        lines.append(f"kind: {c.classification.kind}")
        lines.append(f"  {c.classification.explanation}")
        pair = next((p for p in c.pairs if (p.pairing.a, p.pairing.b) == (d.instance_a, d.instance_b)), None)
        if pair is not None and d.round is not None:
            lines.extend(_window(c.field_a, pair, d.round))
    lines.extend(f"also: {r}" for r in c.remarks)
    lines.append(CAUTION)
    return lines


def _window(field: Field, pair: InstancePair, number: int) -> list[str]:
    """Rounds number-WINDOW..number+WINDOW of both sides, the differing lines marked."""
    out = [f"  rounds of '{pair.pairing.name}' (`*` marks a difference):"]
    for rp in pair.rounds[max(0, number - 1 - WINDOW) : number + WINDOW]:
        for key, rnd in (("A", rp.a), ("B", rp.b)):
            mark = "*" if rp.same_values is False or rp.a is None or rp.b is None else " "
            values = "(absent)" if rnd is None else ", ".join(_short(field, v) for v in rnd.values)
            out.append(f"  {mark} {rp.number:>3} {key} g: {values}")
        present = [r is not None and r.challenge is not None for r in (rp.a, rp.b)]
        mark = "*" if rp.same_challenge is False or present[0] != present[1] else " "
        shown = [("(none)" if r is None or r.challenge is None else _short(field, r.challenge)) for r in (rp.a, rp.b)]
        out.append(f"  {mark} {rp.number:>3}   r: A {shown[0]}  B {shown[1]}")
    return out


def _short(field: Field, value: Element) -> str:
    from stepper.field.display import elide

    return elide(field.fmt(value), 24)
