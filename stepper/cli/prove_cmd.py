"""`stepper prove`: run a reference prover and write its transcript (and witness).

Thin edge over :mod:`stepper.provers.reference`: parses the flags into a
:class:`ProveSpec`, streams the records into a :class:`stepper.transcript.store.TranscriptWriter`,
writes the witness (a binary folder, or JSON for a name ending in .json), and prints one line per instance with its
multiplications. Heavy imports happen inside :func:`run`.
"""

from __future__ import annotations

import argparse
import contextlib
import os
from typing import Any, Iterator

HELP = "run a reference prover (optionally with an injected bug) and write its transcript"
DESCRIPTION = (
    "Run one of stepper's reference sumcheck provers on seeded data and record it. Kinds: generic "
    "(sum of a combine expression over random tables), zerocheck (eq-weighted), zerocheck-eq (the same with "
    "the eq factor taken out of every round: eq-factored rounds), perm-direct (permutation check, one "
    "sumcheck of degree mu+1), perm-grouped (two layers, bucketed second layer), gkr-product (grand product "
    "of a random table through a GKR product circuit: mu-1 layer sumchecks linked by openings and squeezed "
    "coefficients; mu >= 3), ferries (the Brackwater Ferries demo sailing: boarding permutation and deck-slot "
    "zero-check), ferries-fingerprint (the sailing's boarding-log fingerprint through the GKR product "
    "circuit). --fault injects a "
    "named prover bug so you can see what it looks like in `stepper check`. The reference provers are for "
    "debugging and teaching; an accepted transcript is evidence about one run, not a soundness proof."
)


# the kinds of stepper.provers.reference.KINDS (kept here so building the parser imports no numpy)
KINDS = ("generic", "zerocheck", "zerocheck-eq", "perm-direct", "perm-grouped", "gkr-product", "ferries",
         "ferries-fingerprint")
# stepper.verify.fiatshamir.BUILTIN_SCHEDULES, the default first (tests/cli pins that the two agree)
SCHEDULES = ("stepper-sha256/1", "stepper-sha256/2")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from stepper.provers.faults import FAULTS

    parser.add_argument("--kind", choices=KINDS, default="perm-grouped", help="which prover (default perm-grouped)")
    parser.add_argument("-o", "--output", metavar="OUT", required=True,
                        help="transcript to write (.sumtr); a name ending in .jsonl gets the JSON-lines event stream")
    parser.add_argument("--witness-out", metavar="W",
                        help="also write the witness for check --witness: a new folder of raw little-endian "
                             "tables and a manifest, or JSON text when W ends in .json (small cases)")
    parser.add_argument("--force", action="store_true",
                        help="replace OUT and W if they exist as files (without this, existing files are refused "
                             "and left as they were; a folder is never replaced)")
    parser.add_argument("--num-vars", type=int, default=8, metavar="MU", help="variables: tables of 2^MU (default 8)")
    parser.add_argument("--field", default="babybear", metavar="F",
                        help="babybear, koalabear, mersenne31, goldilocks, bn254, bls12-381, NAME^K for an "
                             "extension (e.g. babybear^4), or a prime modulus (default babybear)")
    parser.add_argument("--groups", type=int, default=None, metavar="L",
                        help="perm-grouped/ferries: number of bit groups L (default 2; ferries 0 = direct)")
    parser.add_argument("--switch-round", default="auto", metavar="K",
                        help="perm-grouped/ferries: first round of the direct method in layer 2, 1..5, or auto "
                             "(switch when buckets stop paying; default)")
    parser.add_argument("--seed", type=int, default=1, help="seed of the data (default 1)")
    fault_names = ", ".join(f"{n}@K" if takes else n for n, (takes, _) in FAULTS.items())
    parser.add_argument("--fault", metavar="NAME[@K]", help=f"inject a prover bug: {fault_names}")
    parser.add_argument("--fault-instance", type=int, default=0, metavar="I",
                        help="0-based instance the fault hits (default 0)")
    parser.add_argument("--combine", metavar="EXPR", help="generic/zerocheck/zerocheck-eq: the expression over tables a, b, c ...")
    parser.add_argument("--order", choices=("low-first", "high-first"), default="low-first",
                        help="generic/zerocheck/zerocheck-eq: variable binding order (default low-first)")
    parser.add_argument("--form", choices=("evals", "evals-no-1", "coeffs", "coeffs-no-linear"), default="evals",
                        help="round message form (default evals)")
    parser.add_argument("--tamper", choices=("double-scan", "phantom-car"),
                        help="ferries, ferries-fingerprint: make the sailing's records dishonest")
    parser.add_argument("--label", default="", help="label stored in the transcript")
    parser.add_argument("--schedule", choices=SCHEDULES, default=SCHEDULES[0], metavar="NAME",
                        help=f"the built-in Fiat-Shamir schedule the challenges come from: {', '.join(SCHEDULES)} "
                             f"(default {SCHEDULES[0]}; {SCHEDULES[1]} takes one digest of the state per challenge, "
                             f"the faster to check in extension fields)")
    parser.add_argument("--json", action="store_true", help="print the run summary as JSON")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import UsageError
    from stepper.provers.channel import JsonLinesSink
    from stepper.provers.faults import parse_fault
    from stepper.provers.reference import ProveSpec, parse_field, prove
    from stepper.transcript.store import TranscriptWriter

    _refuse_options_the_kind_ignores(args)
    field = parse_field(args.field)
    fault = parse_fault(args.fault, args.fault_instance) if args.fault else None
    if args.switch_round == "auto":
        switch = None
    elif args.switch_round.isdigit():
        switch = int(args.switch_round)
    else:
        raise UsageError(f"expected --switch-round auto or a round number, found {args.switch_round!r}")
    groups = args.groups if args.groups is not None else 2
    spec = ProveSpec(args.kind, args.num_vars, args.seed, groups, switch, fault, args.order, args.form,
                     args.combine, args.tamper, args.label, args.schedule)
    from stepper.transcript.store.output import atomic_output, refuse_existing

    for path in (args.output, args.witness_out):  # refused before any work is done
        if path:
            refuse_existing(path, args.force)
    if args.output.endswith(".jsonl"):
        with atomic_output(args.output, replace=args.force, what="the events") as out:
            proof = prove(spec, field, JsonLinesSink(out))
    else:
        writer = TranscriptWriter(args.output, metadata=metadata(spec, args.field), atomic=True,
                                  replace=args.force)
        with writer:
            proof = prove(spec, field, writer, witness=bool(args.witness_out))
    if args.witness_out:
        with _removed_on_refusal(args.output):  # an unwritable witness path leaves no orphan transcript
            write_witness(args.witness_out, field, proof, replace=args.force)
    summary = summarise(spec, args.field, proof)
    if args.json:
        import json

        print(json.dumps({"output": args.output, "witness": args.witness_out, **summary}, indent=2))
    else:
        print(f"wrote {args.output}: {args.kind}, mu = {spec.num_vars}, {args.field}"
              + (f", fault {fault}" if fault else ""))
        for inst in summary["instances"]:
            rounds = inst["round_mults"]
            print(f"  {inst['name']}: {len(rounds)} rounds, {sum(rounds)} multiplications in rounds")
        print(f"  total multiplications (set-up included): {summary['multiplications']}")
        if args.witness_out:
            print(f"wrote {args.witness_out}: witness for `stepper check {args.output} --witness {args.witness_out}`")
    return 0


# option -> the kinds it applies to; giving it to another kind is a usage error, not silently ignored
_OPTION_KINDS: dict[str, tuple[str, ...]] = {
    "groups": ("perm-grouped", "ferries"),
    "switch_round": ("perm-grouped", "ferries"),
    "combine": ("generic", "zerocheck", "zerocheck-eq"),
    "tamper": ("ferries", "ferries-fingerprint"),
}
_OPTION_UNSET: dict[str, object] = {"groups": None, "switch_round": "auto", "combine": None, "tamper": None}


def _refuse_options_the_kind_ignores(args: argparse.Namespace) -> None:
    from stepper.errors import UsageError

    for option, kinds in _OPTION_KINDS.items():
        if args.kind not in kinds and getattr(args, option) != _OPTION_UNSET[option]:
            flag = "--" + option.replace("_", "-")
            raise UsageError(f"expected {flag} only with --kind {' or '.join(kinds)}, found it with --kind {args.kind}")


@contextlib.contextmanager
def _removed_on_refusal(path: str) -> Iterator[None]:
    """A statement refused part-way leaves no half-written output behind. Only
    files this run created are removed: entered after the output was opened."""
    from stepper.errors import StepperError

    try:
        yield
    except StepperError:
        if os.path.isfile(path):
            os.unlink(path)
        raise


def metadata(spec: Any, field_text: str) -> dict[str, Any]:
    """The transcript header's metadata; SOURCE_DATE_EPOCH (reproducible-builds.org) fixes `created`."""
    meta: dict[str, Any] = {
        "label": spec.label or f"reference prover {spec.kind}",
        "prover": spec.kind,
        "num_vars": spec.num_vars,
        "field": field_text,
        "seed": spec.seed,
    }
    if spec.kind in ("perm-grouped", "ferries"):
        meta["groups"] = spec.groups
        meta["switch_round"] = "auto" if spec.switch_round is None else spec.switch_round
    if spec.fault is not None:
        meta["fault"] = str(spec.fault)
        meta["fault_instance"] = spec.fault.instance
    if spec.tamper:
        meta["tamper"] = spec.tamper
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.isdigit():
        import datetime as dt

        meta["created"] = dt.datetime.fromtimestamp(int(epoch), dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    return meta


def summarise(spec: Any, field_text: str, proof: Any) -> dict[str, Any]:
    return {
        "kind": spec.kind,
        "num_vars": spec.num_vars,
        "field": field_text,
        "fault": None if spec.fault is None else str(spec.fault),
        "multiplications": proof.total_mults,
        "instances": [{"name": i.name, "round_mults": list(i.round_mults)} for i in proof.instances],
    }


def write_witness(path: str, field: Any, proof: Any, *, replace: bool = False) -> None:
    """The witness, written whole or not at all (an existing file is refused unless ``replace``): a
    binary folder, or JSON for a name ending in .json."""
    if not path.lower().endswith(".json"):
        from stepper.diagnose.witness_dir import write_witness_folder

        write_witness_folder(path, field, ((w.name, dict(w.tables), w.combine, w.order) for w in proof.witness),
                             replace=replace)
        return
    import json

    from stepper.provers.engine import witness_payload
    from stepper.transcript.store.output import atomic_output

    with atomic_output(path, replace=replace, what="the witness") as out:
        out.write(json.dumps(witness_payload(field, proof.witness), separators=(",", ":")))  # C encoder, one pass
        out.write("\n")

