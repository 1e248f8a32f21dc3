"""The committee's report: one self-contained HTML page (inline CSS and SVG, nothing fetched).

The page holds what a committee reads and prints: headline figures (for a randomised or the
fairest plan, its cap, seed or bound with its figures beside the plain plan's), coverage per
topic sorted by shortfall, reviewers' load against cap, the scores of assigned pairs, the gaps
with their shortfall groups and fixes, conflicts by reason, the revisions since the first plan
and who must be told, and the cautions. Every text from the session is HTML-escaped, so a title
can never become markup; the page has no script, no link and no remote address, so opening it
fetches nothing. Each headline figure carries `data-figure="<key of plan --json>"`, so a test
(or a script) can check the page against `review-alloc plan --json`.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from typing import Any

_CSS = """
body { font-family: system-ui, sans-serif; margin: 2em auto; max-width: 60em; color: #1d2430;
  line-height: 1.4; padding: 0 1em; }
h1 { font-size: 1.6em; margin-bottom: 0.1em; }
h2 { font-size: 1.2em; border-bottom: 2px solid #3b5b85; padding-bottom: 0.2em; margin-top: 2em; }
p.meta { color: #5a6473; margin-top: 0; }
.cards { display: grid; grid-template-columns: repeat(auto-fill, minmax(11em, 1fr)); gap: 0.6em; }
.card { border: 1px solid #c9d2de; border-radius: 6px; padding: 0.5em 0.7em; }
.card .label { font-size: 0.8em; color: #5a6473; }
.card .value { font-size: 1.3em; font-weight: 600; }
.card.bad .value { color: #a8321f; }
table { border-collapse: collapse; width: 100%; font-size: 0.9em; margin: 0.5em 0; }
th, td { text-align: left; padding: 0.25em 0.5em; border-bottom: 1px solid #e1e6ed;
  vertical-align: top; }
th { background: #eef2f7; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
tr.short td { color: #a8321f; }
.caution { border-left: 4px solid #c98a16; background: #fdf6e7; padding: 0.5em 0.8em;
  margin: 0.4em 0; }
svg text { font-family: system-ui, sans-serif; font-size: 11px; fill: #1d2430; }
.note { color: #5a6473; font-size: 0.9em; }
@media print { body { margin: 0; max-width: none; } h2 { break-after: avoid; }
  tr, .card, svg { break-inside: avoid; } }
"""

_BLUE, _RED, _GREY = "#3b5b85", "#a8321f", "#c9d2de"


@dataclass(frozen=True)
class ReportData:
    """Everything the report shows, gathered by the workspace (the faces compute nothing)."""

    name: str
    noun: str
    summary: dict[str, Any]
    """The object of `plan --json`."""
    explanation: dict[str, Any]
    """The object of `explain --json`."""
    topics: list[tuple[str, int, int]]
    """(topic, reviews placed, reviews wanted)."""
    load_bands: list[tuple[str, int]]
    reviewers: list[tuple[str, str, int, int, int]]
    """(id, name, load, cap, floor) of every active reviewer."""
    score_bins: list[tuple[str, int]]
    conflicts: list[tuple[str, int]]
    """(reason, pairs) of every declared and inferred conflict, most frequent first."""
    revisions: list[dict[str, Any]]
    """The history's entries (`HistoryEntry.to_json`)."""
    notices_since: int | None
    notices: list[dict[str, Any]] = field(default_factory=list)
    """Who must be told since revision `notices_since`: reviewer, name, email, added, removed."""
    cautions: list[str] = field(default_factory=list)
    generated: str = ""


def _e(value: object) -> str:
    return html.escape(str(value), quote=True)


def _table(
    header: list[str], rows: list[list[object]], numeric: set[int], short: list[bool] | None = None
) -> str:
    head = "".join(
        f'<th class="n">{_e(h)}</th>' if k in numeric else f"<th>{_e(h)}</th>"
        for k, h in enumerate(header)
    )
    body = []
    for r, row in enumerate(rows):
        cells = "".join(
            f'<td class="n">{_e(c)}</td>' if k in numeric else f"<td>{_e(c)}</td>"
            for k, c in enumerate(row)
        )
        mark = ' class="short"' if short is not None and short[r] else ""
        body.append(f"<tr{mark}>{cells}</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _bar_chart(items: list[tuple[str, int]], title: str, colour: str = _BLUE) -> str:
    """A vertical bar chart as inline SVG, one labelled bar per item."""
    if not items:
        return '<p class="note">nothing to show</p>'
    width, height, pad = 640, 200, 30
    top = max(count for _, count in items) or 1
    step = (width - 2 * pad) / len(items)
    bars = []
    for k, (label, count) in enumerate(items):
        h = (height - 2 * pad) * count / top
        x = pad + k * step + step * 0.1
        y = height - pad - h
        bars.append(
            f'<rect x="{x:.1f}" y="{y:.1f}" width="{step * 0.8:.1f}" height="{h:.1f}" '
            f'fill="{colour}"><title>{_e(label)}: {count}</title></rect>'
            f'<text x="{x + step * 0.4:.1f}" y="{y - 4:.1f}" text-anchor="middle">{count}</text>'
            f'<text x="{x + step * 0.4:.1f}" y="{height - pad + 14:.1f}" '
            f'text-anchor="middle">{_e(label)}</text>'
        )
    return (
        f'<svg role="img" aria-label="{_e(title)}" viewBox="0 0 {width} {height}" '
        f'width="100%">'
        f'<line x1="{pad}" y1="{height - pad}" x2="{width - pad}" y2="{height - pad}" '
        f'stroke="{_GREY}"/>{"".join(bars)}</svg>'
    )


def _meter(done: int, wanted: int, over: bool = False) -> str:
    """A small horizontal bar: `done` against `wanted` (red when short, or when over)."""
    width = 120
    share = min(done / wanted, 1.0) if wanted else 1.0
    colour = _RED if over or done < wanted else _BLUE
    return (
        f'<svg viewBox="0 0 {width} 10" width="{width}" height="10">'
        f'<rect width="{width}" height="10" fill="{_GREY}"/>'
        f'<rect width="{width * share:.1f}" height="10" fill="{colour}"/></svg>'
    )


def _cards(data: ReportData) -> str:
    s = data.summary
    gaps = s["gaps"]
    missing = sum(g["missing"] for g in gaps)
    pct = 100.0 * s["required_coverage"] / max(s["required_demand"], 1)
    cards = [
        (f"{data.noun}s", "papers", s["papers"], False),
        ("reviewers", "reviewers", s["reviewers"], False),
        ("assignments", "assignments", len(s["assignments"]), False),
        ("required reviews placed", "required_coverage", s["required_coverage"], False),
        ("required reviews needed", "required_demand", s["required_demand"], False),
        ("required coverage", "", f"{pct:.1f}%", pct < 100),
        ("all reviews placed", "coverage", s["coverage"], False),
        ("all reviews wanted", "demand", s["demand"], False),
        ("reviewer floors met", "floors_met", s["floors_met"], False),
        ("total score", "total_score", f"{s['total_score']:.2f}", False),
        ("mean score", "mean_score", f"{s['mean_score']:.3f}", False),
        (f"{data.noun}s short of reviews", "gaps", len(gaps), bool(gaps)),
        ("reviews missing", "", missing, bool(missing)),
        ("reviewers above cap", "overloads", len(s["overloads"]), bool(s["overloads"])),
        ("reviewers below floor", "underloads", len(s["underloads"]), bool(s["underloads"])),
    ]
    out = []
    for label, key, value, bad in cards:
        attr = f' data-figure="{key}"' if key else ""
        out.append(
            f'<div class="card{" bad" if bad else ""}"><div class="label">{_e(label)}</div>'
            f'<div class="value"{attr}>{_e(value)}</div></div>'
        )
    return f'<div class="cards">{"".join(out)}</div>'


def _topics(data: ReportData) -> str:
    rows = sorted(data.topics, key=lambda t: (-(t[2] - t[1]), t[0]))
    if not rows:
        return '<p class="note">no topics</p>'
    body = "".join(
        f'<tr{" class=short" if placed < wanted else ""}><td>{_e(topic)}</td>'
        f'<td class="n">{placed}</td><td class="n">{wanted}</td>'
        f'<td class="n">{wanted - placed}</td><td>{_meter(placed, wanted)}</td></tr>'
        for topic, placed, wanted in rows
    )
    return (
        "<table><thead><tr><th>topic</th><th class=n>placed</th><th class=n>wanted</th>"
        f"<th class=n>shortfall</th><th>coverage</th></tr></thead><tbody>{body}</tbody></table>"
    )


def _loads(data: ReportData) -> str:
    chart = _bar_chart(data.load_bands, "reviewers by load against cap")
    # A venue has hundreds of reviewers: the chart shows them all, the table those a
    # committee must look at (above cap, below floor, or given nothing).
    flagged = [r for r in data.reviewers if r[2] > r[3] or r[2] < r[4] or r[2] == 0]
    flagged.sort(key=lambda r: (-(r[2] - r[3]), r[0]))
    if not flagged:
        return (
            f"{chart}<p>Every reviewer is within cap and floor and has work "
            f"({len(data.reviewers)} reviewers).</p>"
        )

    def state(load: int, cap: int, floor: int) -> str:
        return "above cap" if load > cap else "below floor" if load < floor else "no work"

    body = "".join(
        f"<tr><td>{_e(rid)}</td><td>{_e(name)}</td><td class=n>{load}</td><td class=n>{cap}</td>"
        f"<td class=n>{floor}</td><td>{state(load, cap, floor)}</td>"
        f"<td>{_meter(load, cap, over=load > cap)}</td></tr>"
        for rid, name, load, cap, floor in flagged
    )
    return (
        f"{chart}<p>{len(flagged)} of {len(data.reviewers)} reviewers are above cap, below "
        "floor or without work:</p><table><thead><tr><th>reviewer</th><th>name</th>"
        "<th class=n>load</th><th class=n>cap</th><th class=n>floor</th><th>state</th>"
        f"<th>load against cap</th></tr></thead><tbody>{body}</tbody></table>"
    )


def _gaps(data: ReportData) -> str:
    report = data.explanation
    gaps = report["gaps"]
    why = {g["paper"]: g.get("reason", "") for g in data.summary["gaps"]}
    if not gaps:
        return f'<p>No gaps: every {_e(data.noun)} has all its reviews.</p>'
    parts = [
        _table(
            [data.noun, "title", "assigned", "reviews", "minimum", "missing", "why"],
            [
                [
                    g["paper"],
                    g.get("title", ""),
                    g["assigned"],
                    g["reviews"],
                    g["min_reviews"],
                    g["missing"],
                    g.get("reason") or why.get(g["paper"], ""),
                ]
                for g in gaps
            ],
            {2, 3, 4, 5},
            [g["missing_required"] > 0 for g in gaps],
        )
    ]
    tiers = {"reviews": "all reviews", "min_reviews": "required reviews"}
    if report["groups"]:
        parts.append("<h3>Shortfall groups (from the minimum cut)</h3>")
        parts.append(
            _table(
                ["group", "tier", "topic", f"{data.noun}s", "reviewers", "needed", "available",
                 "shortfall", "cause"],
                [
                    [
                        g["id"],
                        tiers.get(g["tier"], g["tier"]),
                        ", ".join(g["topics"][:1]),
                        len(g["papers"]),
                        len(g["reviewers"]),
                        g["needed"],
                        g["available"],
                        g["shortfall"],
                        g["cause"],
                    ]
                    for g in report["groups"]
                ],
                {3, 4, 5, 6, 7},
            )
        )
    fixes = report["fixes"]
    caps, recruit = fixes["raise_caps"], fixes["recruit"]
    parts.append("<h3>Smallest fixes (computed exactly)</h3><ul>")
    if caps["raises"]:
        raised = ", ".join(
            f"{_e(r['reviewer'])} {_e(r['name'])} {r['cap']}&rarr;{r['new_cap']}"
            for r in caps["raises"]
        )
        parts.append(
            f"<li>Raise caps by {caps['total']} in total (coverage {caps['coverage_before']} "
            f"&rarr; {caps['coverage_after']} of {caps['demand']}): {raised}</li>"
        )
    else:
        parts.append("<li>Raising caps cannot add any review.</li>")
    if recruit["needs"]:
        needs = "; ".join(_e(n["profile"]) for n in recruit["needs"])
        parts.append(
            f"<li>Recruit {recruit['total']} reviewers (coverage {recruit['coverage_before']} "
            f"&rarr; {recruit['coverage_after']} of {recruit['demand']}): {needs}</li>"
        )
    elif recruit["note"]:
        parts.append(f"<li>Recruits: not computed; {_e(recruit['note'])}</li>")
    else:
        parts.append("<li>Recruiting cannot add any review.</li>")
    parts.append("</ul>")
    return "".join(parts)


def _revisions(data: ReportData) -> str:
    if not data.revisions:
        return '<p class="note">no revisions yet</p>'
    rows = []
    for e in data.revisions:
        f = e["figures"]
        origin = "fresh" if e["fresh"] else f"from {e['parent']}" if e["parent"] else "first"
        rows.append(
            [
                f"{e['number']}{' (current)' if e['current'] else ''}",
                e["created_at"][:19].replace("T", " "),
                origin,
                f"{f['coverage']}/{f['demand']}",
                f"{f['total_score']:.2f}",
                "; ".join(e["changes"]),
            ]
        )
    parts = [_table(["revision", "made", "origin", "coverage", "score", "changes"], rows, set())]
    if data.notices_since is not None:
        parts.append(f"<h3>Who must be told (changes since revision {data.notices_since})</h3>")
        if data.notices:
            parts.append(
                _table(
                    ["reviewer", "name", "e-mail", "added", "removed"],
                    [
                        [
                            n["reviewer"],
                            n["name"],
                            n["email"],
                            "; ".join(n["added"]),
                            "; ".join(n["removed"]),
                        ]
                        for n in data.notices
                    ],
                    set(),
                )
            )
        else:
            parts.append('<p class="note">nobody: no reviewer\'s list changed</p>')
    return "".join(parts)


_TIERS = (
    ("required reviews placed", "required_coverage"),
    ("all reviews placed", "coverage"),
    ("reviewer floors met", "floors_met"),
    ("total score", "total_score"),
)


def _side_by_side(columns: list[tuple[str, dict[str, Any]]]) -> str:
    """The tier figures of several plans, one column each (the plain plan first)."""
    rows = [[label, *(f"{c[key]:g}" for _, c in columns)] for label, key in _TIERS]
    return _table(["figure", *(name for name, _ in columns)], rows, set(range(1, len(columns) + 1)))


def _randomised(r: dict[str, Any], noun: str) -> str:
    """Cap, seed, method, figures beside the plain plan, and how the probabilities spread."""
    bands: dict[str, int] = {}
    cap = float(r["max_probability"])
    for pair in r["probabilities"]:
        q = float(pair["probability"])
        # Pinned pairs are certain whatever the cap.
        band = "certain" if q >= 1 - 1e-9 else "at the cap" if q >= cap - 1e-9 else "below the cap"
        bands[band] = bands.get(band, 0) + 1
    spread = ", ".join(f"{n} {band}" for band, n in sorted(bands.items()))
    return (
        f"<p>A random draw in which no reviewer had more than a {cap:g} chance of any one "
        f"{_e(noun)} (seed {_e(r['seed'])}; {_e(r['method'])}). Anyone holding the session can "
        "repeat the draw from the cap, the seed and the stored probabilities.</p>"
        + _side_by_side(
            [("plain plan", r["plain"]), ("expected", r["expected"]), ("this draw", r["drawn"])]
        )
        + f'<p class="note">expected score given up against the plain plan: '
        f"{float(r['expected_score_given_up']):g}; pairs with a chance: {len(r['probabilities'])}"
        f" ({_e(spread)}); {_e(r['certified'])}</p>"
        + f'<p class="caution">{_e(r["caution"])}</p>'
    )


def _fairest(f: dict[str, Any], noun: str) -> str:
    """The worst-off papers' total, its bound, and the figures beside the plain plan."""
    exact = "proven the highest possible" if f["exact"] else "not proven the highest possible"
    bound = "" if f["bound"] is None else f"; bound {float(f['bound']):g}"
    gap = "" if f["gap_to_bound"] is None else f", gap to the bound {float(f['gap_to_bound']):g}"
    worst = ", ".join(map(str, f["worst_papers"]))
    return (
        f"<p>The plan that raises the lowest total score any {_e(noun)} receives: "
        f"{float(f['lowest_paper_score']):g} ({_e(exact)}{_e(bound)}{_e(gap)}; the plain plan's "
        f"lowest is {float(f['plain_lowest_paper_score']):g}). Method: {_e(f['method'])}.</p>"
        + f"<p>Worst-off {_e(noun)}s: {_e(worst)}</p>"
        + _side_by_side([("plain plan", f["plain"]), ("fairest plan", f["fair"])])
        + f'<p class="note">score given up against the plain plan: '
        f"{float(f['score_given_up']):g}</p>"
        + f'<p class="caution">{_e(f["caution"])}</p>'
    )


def report_html(data: ReportData) -> str:
    """The whole report page as one HTML document."""
    s = data.summary
    if not s["checked"]:
        checked = "NOT checked"
    elif "randomised" in s or "fairness" in s:
        checked = f"checked; {s['optimality']['claim']}"
    elif s.get("optimality", {}).get("proven", True):
        checked = "checked, optimal"
    else:
        checked = "checked; optimal within a relaxation bound"
    revision = f"; revision {s['revision']}" if s.get("revision") is not None else ""
    conflicts = (
        _table(["reason", "pairs"], [[r, n] for r, n in data.conflicts], {1})
        if data.conflicts
        else '<p class="note">no conflicts declared or inferred</p>'
    )
    cautions = "".join(f'<p class="caution">{_e(c)}</p>' for c in data.cautions)
    sections = [("Headline figures", _cards(data))]
    if "randomised" in s:
        sections.append(("A randomised plan", _randomised(s["randomised"], data.noun)))
    if "fairness" in s:
        sections.append(("The fairest plan", _fairest(s["fairness"], data.noun)))
    sections += [
        ("Coverage per topic (largest shortfall first)", _topics(data)),
        ("Reviewers' load against cap", _loads(data)),
        ("Scores of the assigned pairs", _bar_chart(data.score_bins, "assigned pairs by score")),
        (f"{data.noun.capitalize()}s short of reviews", _gaps(data)),
        ("Conflicts of interest by reason", conflicts),
        ("Revisions since the first plan", _revisions(data)),
        ("Cautions", cautions),
    ]
    body = "".join(f"<section><h2>{_e(t)}</h2>{content}</section>" for t, content in sections)
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{_e(data.name)}: reviewer assignment report</title>"
        f"<style>{_CSS}</style></head><body>"
        f"<h1>{_e(data.name)}</h1>"
        f'<p class="meta">Reviewer assignment report: plan made '
        f'{_e(s["created_at"][:16].replace("T", " "))} '
        f"({_e(checked)}{_e(revision)}); report written {_e(data.generated)}</p>"
        f"{body}</body></html>\n"
    )
