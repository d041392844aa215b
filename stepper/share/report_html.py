"""The report as one self-contained HTML page with inline SVG charts.

Pure: renders a :class:`stepper.share.report.ReportDoc` to a string. Invariants: the
page loads nothing (no scripts, no external style sheets, fonts, images or
links to other hosts); every piece of text from a transcript is escaped; the
bucket charts are inline SVG on a log2 scale, bars for the buckets in use per
round, dots for the largest bucket, dashed marks for each round's declared bound.
"""

from __future__ import annotations

import math
from html import escape
from typing import Sequence

from stepper.share.report import BucketRow, InstanceSection, ReportDoc

__all__ = ["to_html", "bucket_chart"]

_STYLE = """
body { font: 15px/1.45 system-ui, sans-serif; margin: 2rem auto; max-width: 72rem; padding: 0 1rem; color: #1d2a30; }
h1 { font-size: 1.5rem; } h2 { font-size: 1.2rem; margin-top: 2rem; border-bottom: 1px solid #c9d3d6; }
table { border-collapse: collapse; margin: .5rem 0; font-variant-numeric: tabular-nums; }
th, td { border: 1px solid #c9d3d6; padding: .2rem .5rem; text-align: left; vertical-align: top; }
th { background: #eef3f4; }
tr.fail td { background: #fbe3df; } tr.pending td { background: #fdf6dc; }
.caution { border-left: 4px solid #b5651d; background: #fbf1e6; padding: .5rem 1rem; }
.verdict-accept { color: #1f6f43; } .verdict-reject { color: #a8321f; } .verdict-incomplete { color: #8a6a00; }
code, .mono { font-family: ui-monospace, monospace; font-size: 13px; }
svg text { font: 11px system-ui, sans-serif; fill: #1d2a30; }
"""


def to_html(doc: ReportDoc) -> str:
    """The whole page."""
    e = escape
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{e(doc.title)}</title><style>{_STYLE}</style></head><body>",
        f"<h1>{e(doc.title)}</h1>",
        f'<p class="caution"><strong>Caution.</strong> {e(doc.caution)}</p>',
        '<h2 id="summary">Summary</h2>',
        _pairs(doc.summary, first_class=f"verdict-{doc.verdict}"),
    ]
    if doc.glue:
        parts += ['<h2 id="glue">Values and squeezes before the first instance</h2>', _list(doc.glue)]
    parts += [
        '<h2 id="first-failure">First failure</h2>',
        _pairs(doc.failure) if doc.failure else "<p>None: every check present passed.</p>",
    ]
    if doc.with_witness:
        parts.append('<h2 id="root-cause">Root cause (with the witness)</h2>')
        if doc.root_cause_fields:
            parts.append(_pairs(doc.root_cause_fields))
        parts.append(_list(doc.root_cause))
    parts.append('<h2 id="findings">Findings</h2>')
    parts.append(_list(doc.findings) if doc.findings else "<p>None.</p>")
    for sec in doc.instances:
        parts.append(_instance(sec))
    if doc.notes:
        parts += ['<h2 id="notes">Notes on the proof</h2>', _list(doc.notes)]
    parts += ['<h2 id="privacy">What this file reveals</h2>', _list(doc.privacy), "</body></html>"]
    return "\n".join(parts) + "\n"


def _pairs(rows: Sequence[tuple[str, str]], first_class: str = "") -> str:
    body = []
    for k, (key, value) in enumerate(rows):
        cls = f' class="{first_class}"' if k == 0 and first_class else ""
        body.append(f"<tr><th>{escape(key)}</th><td{cls}>{escape(value)}</td></tr>")
    return "<table>" + "".join(body) + "</table>"


def _list(items: Sequence[str]) -> str:
    return "<ul>" + "".join(f"<li>{escape(i)}</li>" for i in items) + "</ul>"


def _instance(sec: InstanceSection) -> str:
    e = escape
    out = [
        f'<h2 id="instance-{sec.index}">Instance {sec.index}: {e(sec.name)} ({e(sec.status)})</h2>',
        f"<p>{e(sec.statement)}</p>",
        "<table><tr><th>round</th><th>status</th><th>values sent</th><th>g(0)+g(1)</th><th>claim in</th>"
        "<th>challenge</th><th>replay</th></tr>",
    ]
    for r in sec.rows:
        cls = f' class="{e(r.status)}"' if r.status in ("fail", "pending") else ""
        out.append(
            f"<tr{cls}><td>{r.number}</td><td>{e(r.status)}</td><td class=\"mono\">{e(r.values)}</td>"
            f"<td class=\"mono\">{e(r.sum01)}</td><td class=\"mono\">{e(r.claim_in)}</td>"
            f"<td class=\"mono\">{e(r.challenge)}</td><td>{e(r.explanation)}</td></tr>"
        )
    out.append("</table>")
    out.append(_list(sec.closing))
    if sec.glue:
        out += [f"<h3>Glue of {e(sec.name)}</h3>", _list(sec.glue)]
    if sec.buckets:
        out += [f"<h3>Bucket occupancy of {e(sec.name)}</h3>", bucket_chart(sec.buckets, sec.name)]
    if sec.notes:
        out += ["<h3>Notes</h3>", _list(sec.notes)]
    return "\n".join(out)


def _bound_level(row: BucketRow) -> float:
    """log2(bound + 1) like the other levels; a bound kept only as its log2 is past 2^1024."""
    return math.log2(row.bound + 1) if row.bound is not None else float(row.bound_log2 or 0.0)


def bucket_chart(rows: Sequence[BucketRow], name: str, width: int = 640, height: int = 220) -> str:
    """Inline SVG: log2(buckets in use) per round as bars, log2(largest bucket) as dots,
    each round's bound as a dashed mark: the sum over the round's groups of each group's
    largest possible count, the same groups the bar sums (like with like)."""
    left, right, top, bottom = 44, 12, 16, 30
    plot_w, plot_h = width - left - right, height - top - bottom
    levels = [math.log2(r.buckets + 1) for r in rows]
    levels += [math.log2(r.largest + 1) for r in rows if r.largest is not None]
    levels += [_bound_level(r) for r in rows if r.bound_log2 is not None]
    ceiling = max(1.0, math.ceil(max(levels, default=1.0)))
    step = plot_w / max(1, len(rows))

    def y(level: float) -> float:
        return top + plot_h * (1 - level / ceiling)

    out = [
        f'<svg width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" role="img">',
        f"<title>Bucket occupancy per round of {escape(name)} (log2 scale)</title>",
        f'<line x1="{left}" y1="{top + plot_h}" x2="{left + plot_w}" y2="{top + plot_h}" stroke="#7b8a8f"/>',
        f'<line x1="{left}" y1="{top}" x2="{left}" y2="{top + plot_h}" stroke="#7b8a8f"/>',
    ]
    for tick in range(0, int(ceiling) + 1, max(1, int(ceiling) // 4)):
        out.append(f'<text x="{left - 6}" y="{y(tick) + 4:.1f}" text-anchor="end">2^{tick}</text>')
    for k, r in enumerate(rows):
        x = left + k * step
        level = math.log2(r.buckets + 1)
        out.append(
            f'<rect x="{x + step * 0.15:.1f}" y="{y(level):.1f}" width="{step * 0.7:.1f}" '
            f'height="{top + plot_h - y(level):.1f}" fill="#3f8f8a"><title>round {r.round}: '
            f"{r.buckets} buckets</title></rect>"
        )
        if r.largest is not None:
            out.append(
                f'<circle cx="{x + step / 2:.1f}" cy="{y(math.log2(r.largest + 1)):.1f}" r="3.5" fill="#c4741c">'
                f"<title>round {r.round}: largest bucket {r.largest}</title></circle>"
            )
        out.append(f'<text x="{x + step / 2:.1f}" y="{height - 12}" text-anchor="middle">{r.round}</text>')
        if r.bound_log2 is not None:
            yb = y(_bound_level(r))
            out.append(f'<line x1="{x + step * 0.1:.1f}" y1="{yb:.1f}" x2="{x + step * 0.9:.1f}" y2="{yb:.1f}" '
                       f'stroke="#a8321f" stroke-dasharray="5 3"><title>round {r.round}: bound '
                       f"{escape(r.bound_words())}</title></line>")
    out.append(f'<text x="{left + plot_w / 2:.1f}" y="{height - 1}" text-anchor="middle">round (bars: buckets '
               "in use, summed over groups; dots: largest bucket; dashes: the groups' bounds summed; "
               "log2 scale)</text>")
    out.append("</svg>")
    return "\n".join(out)
