"""Round trips, as properties over generated proofs: every event and element type survives the
binary transcript (writer -> reader) and the JSON-lines form (export -> import) unchanged, in every
kind of field (a 31-bit prime, Goldilocks, BN254's scalar field, a degree-4 extension). The
moduli are those of tests/plain_sumcheck.py (BabyBear and Goldilocks: common practice, no source;
BN254: EIP-197). The whole-file sweep and the event-by-event replay agreeing on verdict and first
failure is the property of tests/verify/test_sweep.py (every field, honest and corrupted proofs).
"""

from __future__ import annotations

import io
import random
import sys
from pathlib import Path

from hypothesis import HealthCheck, given, settings, strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))

from plain_sumcheck import BABYBEAR, BN254, GOLDILOCKS  # noqa: E402
from stepper.cli.export_cmd import _export  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.transcript.store import TranscriptWriter, append_note, open_events  # noqa: E402
from stepper.transcript.model import Note  # noqa: E402

FIELDS = {
    "babybear": {"type": "field", "name": "babybear"},
    "goldilocks": {"type": "field", "modulus": str(GOLDILOCKS)},
    "bn254": {"type": "field", "modulus": str(BN254)},
    "babybear^4": {"type": "field", "name": "babybear", "extension_degree": 4},
}
MODULI = {"babybear": BABYBEAR, "goldilocks": GOLDILOCKS, "bn254": BN254, "babybear^4": BABYBEAR}
FORMS = ("evals", "evals-no-1", "coeffs", "coeffs-no-linear")


def _element(rng: random.Random, name: str):
    p = MODULI[name]
    edge = rng.choice((0, 1, p - 1, rng.randrange(p)))
    if name.endswith("^4"):
        return [str(edge) if rng.random() < 0.5 else edge] + [rng.randrange(p) for _ in range(3)]
    return hex(edge) if rng.random() < 0.2 else (str(edge) if rng.random() < 0.5 else edge)


def _payloads(rng: random.Random, name: str) -> list[dict]:
    """A structurally valid proof (the values need not pass the checks: the round trip is about form)."""
    out = [dict(FIELDS[name]), {"type": "schedule", "name": "stepper-sha256/1", "label": "isle-of-quill-0740"}]
    for index in range(rng.randint(1, 3)):
        num_vars, degree = rng.randint(1, 4), rng.randint(1, 3)
        form = rng.choice(FORMS)
        if rng.random() < 0.3:
            terms = [_element(rng, name) for _ in range(rng.randint(1, 3))]
            out.append({"type": "batch", "coefficient": _element(rng, name), "terms": terms,
                        "sources": [f"gate-{i}" for i in range(len(terms))]})
        out.append({"type": "instance", "name": f"sailing-{index}", "num_vars": num_vars, "degree": degree,
                    "claim": _element(rng, name), "form": form,
                    "order": rng.choice(("low-first", "high-first"))})
        for k in range(1, num_vars + 1):
            count = degree + (0 if form in ("evals-no-1", "coeffs-no-linear") else 1)
            out.append({"type": "round", "evals" if form.startswith("evals") else "coeffs":
                        [_element(rng, name) for _ in range(count)]})
            if rng.random() < 0.2:
                out.append({"type": "note", "text": rng.choice(("gate 3 rescanned", "\u00e9t\u00e9 \U0001f6a2", "")
                                                               ) or "x", "round": k})
            out.append({"type": "challenge", "value": _element(rng, name)})
            if rng.random() < 0.1:
                out.append({"type": "buckets", "round": k, "chunk": 0, "count": 3, "sizes": [1, 0, 2],
                            "group": 0, "groups": 1})
        if rng.random() < 0.9:
            out.append({"type": "final", "value": _element(rng, name)})
        if rng.random() < 0.2:
            out.append({"type": "harbour-log", "wind": "SW 5", "gusts": [7, {"knots": 12}], "ok": True})
    return out


def _records(path: Path) -> tuple[list, str, str]:
    with open_events(path) as stream:
        records = list(stream)
    return records, stream.completeness, stream.digest


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(field=st.sampled_from(sorted(FIELDS)), seed=st.integers(0, 2**32), sealed=st.booleans(),
       appended=st.integers(0, 2))
def test_every_event_and_element_survives_the_transcript_and_the_json_lines_form(tmp_path_factory, field, seed,
                                                                                 sealed, appended):
    folder = tmp_path_factory.mktemp("roundtrip")
    rng = random.Random(seed)
    original = folder / "quill.sumtr"
    writer = TranscriptWriter(original, metadata={"label": "isle-of-quill-0740", "seed": seed})
    written = [writer.write_payload(p) for p in _payloads(rng, field)]
    writer.finish() if sealed else writer.close()
    for i in range(appended if sealed else 0):
        append_note(original, Note(f"checked by the harbour master ({i})", None, None))
    records, completeness, digest = _records(original)
    assert records[: len(written)] == written  # binary form: what was written is what is read
    assert (completeness, digest) == (("complete", "verified") if sealed else ("incomplete", "missing"))
    assert len(records) == len(written) + (appended if sealed else 0)

    exported = folder / "quill.jsonl"
    out = io.StringIO()
    _export(str(original), out)
    exported.write_text(out.getvalue())
    assert _records(exported)[0] == records  # JSON-lines form: the same records

    again = folder / "again.sumtr"
    assert main(["import", str(exported), "-o", str(again)]) == 0
    assert _records(again)[0] == records  # and back to a transcript


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(field=st.sampled_from(["babybear", "goldilocks", "babybear^4"]), size=st.sampled_from([8, 16]),
       seed=st.integers(0, 2**32))
def test_glue_events_survive_the_transcript_and_the_json_lines_form(tmp_path_factory, field, size, seed):
    # named values, squeezes, openings and the claim/final expressions of a GKR product circuit (stepper's
    # reference prover, checked against brute force in tests/provers/test_gkr.py)
    import numpy as np

    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.gkr import prove_grand_product
    from stepper.provers.reference import parse_field

    folder = tmp_path_factory.mktemp("glue")
    decl = parse_field(field)
    original = folder / "product.sumtr"
    with TranscriptWriter(original) as writer:
        prove_grand_product(ProofChannel(decl, writer, label="isle-of-quill-0740"), MulCounter(decl),
                            decl.base.vrandom(size, np.random.default_rng(seed)))
    records, completeness, digest = _records(original)
    kinds = {type(r).__name__ for r in records}
    assert {"NamedValue", "Squeeze", "Opening"} <= kinds and (completeness, digest) == ("complete", "verified")
    exported = folder / "product.jsonl"
    out = io.StringIO()
    _export(str(original), out)
    exported.write_text(out.getvalue())
    assert _records(exported)[0] == records
    again = folder / "again.sumtr"
    assert main(["import", str(exported), "-o", str(again)]) == 0
    assert _records(again) == (records, "complete", "verified")
