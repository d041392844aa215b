"""stepper.share.report and stepper.share.report_html: what a shared report holds and that the page is self-contained.

The HTML is checked with the standard library's html.parser (a reference
parser, not stepper's own code); runs come from tests/sumcheck_pairs.py.
"""

from __future__ import annotations

import dataclasses
from html.parser import HTMLParser

from stepper.share.report import _text_chart, build, bucket_rows, short, to_markdown
from stepper.share.report_html import bucket_chart, to_html
from stepper.diagnose.rootcause import diagnose
from stepper.transcript.model import BucketStats, Header, Note
from stepper.verify.replay import replay_transcript
from stepper.diagnose.witness import witness_from_map
from sumcheck_pairs import BABYBEAR, brackwater_specs, fold, run_events, witness_map

VOID = {"meta", "br", "img", "hr", "input", "link"}


def _off_by_one_at_round_2(payload):
    if payload["type"] == "round" and payload["evals"][0] == FAULTY_G0:
        payload["evals"][2] = (payload["evals"][2] + 1) % BABYBEAR
    return payload


HONEST_EVENTS = run_events(brackwater_specs())
FAULTY_G0 = next(e.values[0] for e in HONEST_EVENTS if type(e).__name__ == "RoundMsg" and e.round == 2)
FAULTY_EVENTS = run_events(brackwater_specs(), tamper=_off_by_one_at_round_2)
BUCKETS = tuple(BucketStats(0, k, 0, 1 << (4 - k), tuple(range(1, (1 << (4 - k)) + 1)), 6, 8) for k in (1, 2, 3))


def faulty_transcript(metadata: dict | None = None):
    t = fold([*FAULTY_EVENTS, *BUCKETS, Note("gate 3 rescanned", 0, 2), Note("sailing delayed", None, None)])
    return dataclasses.replace(t, header=Header(metadata=metadata or {"label": "isle-of-quill-0740"}))


class Page(HTMLParser):
    """Collects tags, attributes and text, and checks that tags nest properly."""

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.errors: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def parse(html: str) -> Page:
    page = Page()
    page.feed(html)
    page.close()
    return page


def test_the_html_report_is_well_formed_and_loads_nothing_from_elsewhere():
    t = faulty_transcript()
    page = parse(to_html(build(t, replay_transcript(t), source="isle.sumtr")))
    assert page.errors == [] and page.stack == []
    names = [tag for tag, _ in page.tags]
    assert "script" not in names and "link" not in names and "img" not in names and "iframe" not in names
    for _, attrs in page.tags:
        for key in ("src", "href"):
            assert key not in attrs or attrs[key].startswith("#")
    assert names.count("svg") == 1  # one bucket chart, for the one instance that reported buckets


def test_the_report_carries_the_failing_rounds_explanation_in_both_forms():
    t = faulty_transcript()
    report = replay_transcript(t)
    first = report.first_failure
    assert (first.instance, first.round, first.check) == (0, 3, "sum")
    doc = build(t, report, source="isle.sumtr")
    text = " ".join(parse(to_html(doc)).text)
    assert first.explanation in text
    assert first.explanation in to_markdown(doc).replace("\\", "")


def test_the_report_always_says_a_passing_replay_is_not_a_soundness_proof_and_what_the_file_reveals():
    t = fold(HONEST_EVENTS)
    report = replay_transcript(t)
    assert report.verdict == "accept"
    doc = build(t, report)
    for rendered in (" ".join(parse(to_html(doc)).text), to_markdown(doc).replace("\\", "")):
        assert "evidence about this one run only" in rendered
        assert "never holds the witness" in rendered
        assert "None: every check present passed." in rendered


def test_notes_of_rounds_and_of_the_proof_appear():
    t = faulty_transcript()
    md = to_markdown(build(t, replay_transcript(t)))
    assert "instance 'boarding-permutation', round 2: gate 3 rescanned" in md
    assert "proof: sailing delayed" in md


def test_text_from_the_file_is_escaped_not_executed():
    t = faulty_transcript({"label": "<script>alert(1)</script>"})
    html = to_html(build(t, replay_transcript(t)))
    page = parse(html)
    assert "script" not in [tag for tag, _ in page.tags]
    assert "<script>alert(1)</script>" in " ".join(page.text)  # shown as text


def test_with_a_witness_the_report_shows_the_root_cause_and_warns_that_it_reveals_witness_values():
    t = faulty_transcript()
    report = replay_transcript(t)
    diagnosis = diagnose(t, witness_from_map(witness_map(brackwater_specs())), report)
    doc = build(t, report, diagnosis)
    fields = dict(doc.root_cause_fields)
    assert (fields["round"], fields["check"], fields["point"]) == ("2", "honest-poly", "2")
    md = to_markdown(doc)
    assert "Root cause (with the witness)" in md
    assert "made with a witness" in md
    assert diagnosis.explain()[0] in " ".join(parse(to_html(doc)).text)


def test_bucket_rows_sum_chunks_per_round_and_the_chart_marks_every_round():
    stats = [BucketStats(0, 1, 0, 3, (1, 2, 5), 4), BucketStats(0, 1, 1, 2, (7, 1), 4), BucketStats(0, 2, 0, 1, None)]
    rows = bucket_rows(stats)
    assert [(r.round, r.buckets, r.largest, r.entries, r.bound, r.groups) for r in rows] == [
        (1, 5, 7, 16, 32, 2), (2, 1, None, None, None, 1)]
    svg = parse(bucket_chart(rows, "boarding-permutation"))
    assert [tag for tag, _ in svg.tags].count("rect") == 2
    assert [tag for tag, _ in svg.tags].count("circle") == 1  # round 2 sent no sizes


def test_the_bucket_chart_compares_the_sum_over_groups_with_the_sum_of_their_bounds():
    # two groups of a round, each with 3 of its 2^2 = 4 possible buckets in use: 6 in all, within 4 + 4 = 8;
    # drawn against one group's bound (4) the sum used to look above the bound
    stats = [BucketStats(0, 1, 0, 3, None, 2), BucketStats(0, 1, 1, 3, None, 2)]
    rows = bucket_rows(stats)
    assert (rows[0].buckets, rows[0].bound) == (6, 8)
    assert rows[0].bound_words() == "8 (sum of the 2 groups' bounds)"
    chart = "\n".join(_text_chart(rows))
    assert "summed over the round's groups" in chart and "above the bound" not in chart
    svg = bucket_chart(rows, "boarding-permutation-grouped")
    assert "sum of the 2 groups&#x27; bounds" in svg or "sum of the 2 groups' bounds" in svg


def test_long_elements_are_shortened_in_the_middle():
    assert short("1234567890" * 5, 13) == "12345...67890"
    assert short("42") == "42"


def test_the_glue_is_listed_per_instance_and_before_the_first_instance():
    import numpy as np

    from stepper.field.field import NAMED_PRIMES, get_field
    from stepper.provers.channel import ListSink, ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.gkr import prove_grand_product

    field = get_field(NAMED_PRIMES["babybear"])
    sink = ListSink()
    prove_grand_product(ProofChannel(field, sink), MulCounter(field), field.vrandom(8, np.random.default_rng(5)))
    transcript = sink.transcript()
    doc = build(transcript, replay_transcript(transcript))
    assert [line.split(" = ")[0] for line in doc.glue] == ["value product.outputs", "squeeze product.c1",
                                                           "value product.r1"]
    first = doc.instances[0].glue
    claim = field.fmt(transcript.instances[0].start.claim)
    assert first[0] == (f"link pass: claim_expr (1 - product.c1) * product.outputs[0] + product.c1 * "
                        f"product.outputs[1] = {claim}; claim {claim}")
    assert first[1].startswith("evaluation pass: final_expr eq(product.r1) * product.v2.lo * product.v2.hi = ")
    assert [line.split(" = ")[0] for line in first[2:]] == [
        "opening product.v2.lo (table v2.lo)", "opening product.v2.hi (table v2.hi)", "squeeze product.c2",
        "value product.r2"]
    opening = next(g for g in transcript.instances[0].glue if g.name == "product.v2.lo")
    assert first[2].endswith(field.fmt(opening.value))
    markdown = to_markdown(doc)
    assert "## Values and squeezes before the first instance" in markdown and "### Glue" in markdown
    page = to_html(doc)
    assert "Glue of product.layer1" in page and "squeeze product.c2" in page
    assert "openings (a table's claimed value at one point)" in " ".join(doc.privacy)


def test_a_failed_link_shows_expected_found_and_why():
    import numpy as np

    from stepper.field.field import NAMED_PRIMES, get_field
    from stepper.provers.channel import ListSink, ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.faults import Fault
    from stepper.provers.gkr import prove_grand_product

    field = get_field(NAMED_PRIMES["babybear"])
    sink = ListSink()
    prove_grand_product(ProofChannel(field, sink, fault=Fault("stale-coefficient", 1, 1)), MulCounter(field),
                        field.vrandom(8, np.random.default_rng(6)))
    transcript = sink.transcript()
    report = replay_transcript(transcript)
    line = build(transcript, report).instances[1].glue[0]
    link = report.instances[1].link
    assert line.startswith(f"link fail: claim_expr product.v2.lo + product.c2 * (product.v2.hi - product.v2.lo) = "
                           f"{field.fmt(link.expected)}; claim {field.fmt(transcript.instances[1].start.claim)} (")
    assert link.expected != transcript.instances[1].start.claim


def test_a_bound_too_large_to_print_is_written_as_a_power_of_two() -> None:
    # found by bench/fuzz.py (corpus c4036d026ab96fed): a round number changed in a bucket event made
    # the bound 2^(2^k c) too long for Python to print in decimal (exit 70 in the write-up)
    from stepper.share.report import count_text

    assert count_text(999_999_999_999_999_999) == "999999999999999999"
    assert count_text(2**100) == "~2^100.0"
    assert count_text(2**40000) == "~2^40000.0"  # 12,042 decimal digits: past the 4300-digit limit


def test_a_hostile_bound_is_kept_as_its_log2_and_never_built_as_an_integer() -> None:
    # the reader admits bound_log2 up to 2^40; 1 << 2^40 would need 128 GiB before anything printed
    stats = [BucketStats(0, 3, 0, 5, None, 1 << 40), BucketStats(0, 3, 1, 2, None, 1 << 40)]
    (row,) = bucket_rows(stats)
    assert row.bound is None and row.bound_log2 == (1 << 40) + 1.0  # 2^b + 2^b = 2^(b+1)
    assert row.bound_words() == f"~2^{(1 << 40) + 1}.0 (sum of the 2 groups' bounds)"
    assert not row.above_bound()
    chart = "\n".join(_text_chart((row,)))
    assert f"~2^{(1 << 40) + 1}.0" in chart and "above the bound" not in chart
    assert "<line" in bucket_chart((row,), "boarding-permutation")


def test_a_small_bound_stays_exact_beside_its_log2() -> None:
    (row,) = bucket_rows([BucketStats(0, 1, 0, 9, None, 3)])
    assert (row.bound, row.bound_log2, row.above_bound(), row.bound_text()) == (8, 3.0, True, "8")
