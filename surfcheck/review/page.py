"""The HTML review page, built from the grade result document (the one result.json holds), the part
summary and the pictures written beside it. Plain HTML5 with a small inline stylesheet: no scripts, no
external resources, every picture a relative link."""

from __future__ import annotations

from dataclasses import dataclass
from html import escape

ORDER_MEASURES = {"G0": "gap", "G1": "tangent angle", "G2": "curvature jump", "G3": "curvature-rate jump"}

STYLE = """
body { font-family: system-ui, sans-serif; color: #1d1d1f; max-width: 1280px; margin: 0 auto; padding: 0 18px 40px;
  line-height: 1.45; }
h1 { font-size: 1.6em; margin: 18px 0 4px; } h2 { border-bottom: 2px solid #d0d4da; padding-bottom: 3px; margin-top: 34px; }
h3 { margin-top: 22px; }
table { border-collapse: collapse; margin: 8px 0 14px; font-size: 0.93em; }
th, td { border: 1px solid #d0d4da; padding: 3px 8px; text-align: left; vertical-align: top; }
th { background: #f1f3f5; } td.num { text-align: right; font-variant-numeric: tabular-nums; }
.ok { color: #137a69; font-weight: 600; } .fail { color: #b0172c; font-weight: 600; }
.not-resolved { color: #3c4043; font-weight: 600; } .none { color: #80868b; font-style: italic; }
.verdict { font-size: 1.25em; padding: 8px 14px; border-radius: 6px; display: inline-block; margin: 6px 0; }
.verdict.pass { background: #e3f4ef; color: #137a69; } .verdict.fail { background: #fbe5e8; color: #b0172c; }
.verdict.no-requirement { background: #eef0f2; color: #3c4043; }
figure { margin: 12px 0 22px; } figure img { max-width: 100%; height: auto; border: 1px solid #e2e5e9; }
figcaption { font-size: 0.9em; color: #3c4043; margin-top: 4px; }
nav ul { columns: 3; padding-left: 18px; } .caution { background: #fff7e0; border-left: 4px solid #e0a800;
  padding: 8px 12px; margin: 18px 0; } .small { font-size: 0.88em; color: #3c4043; }
details summary { cursor: pointer; color: #0b57a4; }
.advice { background: #eef4fb; border-left: 4px solid #0b57a4; padding: 6px 12px; }
.reading { background: #f4f6f8; border: 1px solid #d0d4da; border-radius: 6px; padding: 6px 14px; margin: 14px 0; }
.reading h2 { border: none; margin: 6px 0 2px; font-size: 1.15em; } .reading ul { margin: 4px 0; padding-left: 20px; }
"""


# what an option left unset means, as the Parameters table says it
UNSET = {"stations": "from the seam length", "spacing": "two strip widths (at most 48 stations per seam)",
         "strip": "from the edge length", "reach": "from the edge length", "nominal": "none",
         "deflection": "the reader's default (STEP parts only)"}
READING = (
    ("Verdict table", "one row per seam: each order G0..G3 ok, fail or not resolved, and the highest order"
                      " achieved."),
    ("Heatmaps", "the part coloured by the curvature jump between one-sided surface fits: near zero where the"
                 " surface is curvature-continuous, a bright line along a seam where its curvature jumps. The"
                 " seam is drawn as a tube outlined in black, coloured by its result per station."),
    ("Reflection lines", "each seam's part as if it mirrored a row of parallel light tubes: light and dark"
                         " stripes computed from the smoothed surface normals. A stripe that breaks (jumps"
                         " sideways) at the seam marks a crease: the normals jump, the seam is G0 at most. One"
                         " that runs on but kinks marks a curvature jump: G1, not G2. Stripes that bend"
                         " smoothly across the seam mean G2 or better."),
    ("Along the seam", "G0..G3 at each station against the tolerance band."),
    ("Curvature across", "at the worst stations, each side's one-sided fit and the curvature it reads; the"
                         " two curvatures meeting at the seam is G2, their slopes meeting is G3."),
)


@dataclass(frozen=True)
class Picture:
    """A picture beside the page: its file name (relative), a caption and a short alternative text."""

    file: str
    caption: str
    alt: str


def _status(status: str | None) -> str:
    status = status or "no data"
    return f'<span class="{escape(status.replace(" ", "-"))}">{escape(status)}</span>'


def _num(x, digits: int = 4) -> str:
    return "&ndash;" if x is None else escape(f"{x:.{digits}g}")


def _table(header: list[str] | None, rows: list[list[str]], numeric: set[int] | None = None) -> str:
    """A table from already escaped cells (no header row when ``header`` is None; then the first
    column holds the row names); columns in ``numeric`` are right-aligned."""
    numeric = numeric or set()
    if header is None:
        body = "".join(f"<tr><th>{row[0]}</th>" + "".join(f"<td>{c}</td>" for c in row[1:]) + "</tr>" for row in rows)
        return f"<table><tbody>{body}</tbody></table>"
    head = "".join(f"<th>{h}</th>" for h in header)
    body = "".join("<tr>" + "".join(f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>"
                                    for i, c in enumerate(row)) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _figure(picture: Picture) -> str:
    src = escape(picture.file, quote=True)
    return (f'<figure><a href="{src}"><img src="{src}" alt="{escape(picture.alt, quote=True)}"></a>'
            f"<figcaption>{escape(picture.caption)}</figcaption></figure>")


def _achieved(seam: dict) -> str:
    text = f"G{seam['achieved']}" if seam["achieved"] >= 0 else "none"
    limit = seam["limited_by"]
    return escape(text) + (f" ({escape(limit['order'])} {_status(limit['status'])})" if limit else "")


def _part_section(summary: dict) -> str:
    u = escape(summary["units"])
    box = summary["bounding_box"]
    e = summary["edge_length"]
    d = summary["defects"]
    facts = [
        ["source", escape(summary["source"])],
        ["size", f"{summary['vertices']} vertices, {summary['faces']} triangles, units {u}"],
        ["bounding box", f"({', '.join(_num(x) for x in box['min'])}) .. ({', '.join(_num(x) for x in box['max'])})"
                         f" {u}, diagonal {_num(box['diagonal'])} {u}"],
        ["area", f"{_num(summary['area'])} {u}<sup>2</sup>"],
        ["edge length", f"min {_num(e['min'])}, median {_num(e['median'])}, max {_num(e['max'])} {u}"],
        ["topology", f"connected components {d['components']}, boundary loops {summary['boundary_loops']},"
                     f" group seams {summary['group_seams']}, misoriented edges {d['misoriented_edges']}"],
    ]
    groups = [[escape(g["name"]), str(g["faces"]), _num(g["area"])] for g in summary["groups"]]
    warnings = "".join(f"<li>{escape(w)}</li>" for w in summary.get("warnings", []))
    return ('<section id="part"><h2>Part</h2>' + _table(None, facts)
            + "<h3>Face groups</h3>" + _table(["group", "triangles", f"area [{u}<sup>2</sup>]"], groups, {1, 2})
            + (f"<h3>Loading warnings</h3><ul>{warnings}</ul>" if warnings else "") + "</section>")


def _verdict_section(document: dict) -> str:
    verdict = document["verdict"]
    required = document["require"]
    headline = (f"Requirement {escape(required)}: {escape(verdict)}" if required
                else "No requirement given: grades only")
    u = escape(document["units"])
    rows = []
    for seam in document["seams"]:
        sid = escape(seam["id"])
        rows.append([f'<a href="#{sid}">{sid}</a>', escape(" | ".join(seam["groups"])), _num(seam["length"]),
                     str(seam["stations"]), *(_status(seam["orders"][k]["status"]) for k in ORDER_MEASURES),
                     _achieved(seam)])
    table = _table(["seam", "groups (A | B)", f"length [{u}]", "stations", "G0", "G1", "G2", "G3", "achieved"],
                   rows, {2, 3})
    return (f'<section id="verdict"><h2>Verdict</h2><p class="verdict {escape(verdict.replace(" ", "-"))}">'
            f"{headline}</p>{table}<p class=\"small\">Each order per seam: ok when every station is within"
            " tolerance by more than its expanded uncertainty, fail when a station exceeds it by more, not"
            " resolved otherwise. Achieved: the highest order k with G0..Gk all ok.</p></section>")


def _order_table(seam: dict, coverage: float) -> str:
    rows = []
    for name, measure in ORDER_MEASURES.items():
        o = seam["orders"][name]
        unit = escape(o["unit"])
        expanded = None if o["uncertainty"] is None else coverage * o["uncertainty"]
        position = " ".join(_num(x) for x in o["worst_position"])
        rows.append([escape(name), escape(measure), unit, _num(o["value"]), _num(o["uncertainty"], 3),
                     _num(expanded, 3), _num(o["tolerance"]), _status(o["status"]), _num(o["max"]),
                     _num(o["p95"]), f"{o['worst_station']} at ({position})"])
    return _table(["order", "measure", "unit", "value", "u", f"U (k = {coverage:g})", "tolerance", "status",
                   "max", "95th pct", "governing station (position)"], rows, {3, 4, 5, 6, 8, 9})


def _station_table(seam: dict, units: str) -> str:
    rows = []
    for st in seam["station_values"]:
        cells = [str(st["index"]), _num(st["s"]), " ".join(_num(x) for x in st["position"])]
        for name in ORDER_MEASURES:
            o = st[name]
            cells.append(f"{_num(o['value'], 3)} {_status(o['status'])}")
        cells.append(" / ".join(_num(c, 3) for c in st["curvature"]))
        rows.append(cells)
    u = escape(units)
    header = ["station", f"s [{u}]", "position", f"G0 [{u}]", "G1 [deg]", f"G2 [1/{u}]", f"G3 [1/{u}<sup>2</sup>]",
              f"curvature A / B [1/{u}]"]
    return f"<details><summary>every station ({len(rows)})</summary>{_table(header, rows, {0, 1})}</details>"


def _seam_section(seam: dict, document: dict, pictures: list[Picture]) -> str:
    sid = escape(seam["id"])
    u = escape(document["units"])
    coverage = float(document["tolerance"]["coverage"])
    facts = (f"<p>Groups A | B: <b>{escape(seam['groups'][0])}</b> | <b>{escape(seam['groups'][1])}</b>;"
             f" length {_num(seam['length'])} {u}; {seam['stations']} stations;"
             f" {'welded' if seam['welded'] else 'separate shells'}; achieved {_achieved(seam)}."
             f" A station is ok where value + {_num(coverage)} u is within the tolerance; the seam fails only where"
             f" a station's value - {_num(seam['decision']['fail_coverage'], 3)} u exceeds it (Sidak over its"
             f" {seam['stations']} stations, so a conforming seam fails as rarely as one station).</p>")
    todo = "".join(f'<p class="advice"><b>What to do:</b> {escape(a["text"])}</p>'
                   for a in document["advice"] if a["seam"] == seam["id"])
    figures = "".join(_figure(p) for p in pictures)
    return (f'<section id="{sid}" class="seam"><h2>{sid}: {escape(" | ".join(seam["groups"]))}</h2>{facts}'
            f"{todo}{_order_table(seam, coverage)}{_station_table(seam, document['units'])}{figures}</section>")


def _agreement_section(exact: dict, document: dict) -> str:
    """The exact B-rep grades beside the mesh grades of the same seams (agreement.py)."""
    from surfcheck.review.agreement import DIFFERS, agreement_counts, compare_grades

    rows = compare_grades(exact, document)
    counts = agreement_counts(rows)
    achieved = {s["id"]: s["achieved"] for s in exact["seams"]}
    cells = [[escape(r.seam), escape(" | ".join(r.groups)), escape(r.order), escape(r.unit), _num(r.exact),
              _status(r.exact_status), _num(r.mesh), _num(r.mesh_expanded, 3), _status(r.mesh_status),
              f"<b>{escape(r.reading)}</b>" if r.reading == DIFFERS else escape(r.reading)] for r in rows]
    seams = "; ".join(f"{escape(s['id'])} exact G{achieved[s['id']]}, mesh "
                      + (f"G{s['achieved']}" if s["achieved"] >= 0 else "none")
                      for s in document["seams"] if s["id"] in achieved and achieved[s["id"]] >= 0)
    k = _num(float(document["tolerance"]["coverage"]))
    return ('<section id="agreement"><h2>Exact B-rep grades beside the mesh grades</h2>'
            f"<p>The part's B-rep faces graded exactly along each shared edge (from the surfaces' derivatives),"
            f" beside the grades of its tessellation that this page draws. Of {len(rows)} orders,"
            f" {counts['agrees']} agree (the values differ by at most k = {k} times the uncertainty of their"
            f" difference, with the same decision), {counts['differs']} differ, {counts['mesh not resolved']}"
            f" are not resolved by the mesh. Achieved: {seams or 'none'}.</p>"
            + _table(["seam", "groups", "order", "unit", "exact value", "exact", "mesh value", f"U (k = {k})", "mesh",
                      "reading"], cells, {4, 6, 7})
            + '<p>The exact grades as data: <a href="exact.json">exact.json</a>.</p></section>')


def readable(name: str, value) -> str:
    """A parameter's value as a person reads it: an unset option says what it defaults to (UNSET), a
    seam list ['all'] says "all seams", flags say on or off, lists are joined, mappings listed."""
    if value is None:
        return UNSET.get(name, "default")
    if isinstance(value, bool):
        return "on" if value else "off"
    if name == "seams" and list(value) == ["all"]:
        return "all seams"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, (list, tuple)):
        return ", ".join(readable("", v) for v in value) or "none"
    if isinstance(value, dict):
        return "; ".join(f"{k} {readable(k, v)}" for k, v in value.items()) or "none"
    return str(value)


def _reading_box() -> str:
    items = "".join(f"<li><b>{escape(what)}</b>: {escape(text)}</li>" for what, text in READING)
    return f'<section class="reading" id="reading"><h2>How to read this page</h2><ul>{items}</ul></section>'


def _parameters_section(document: dict, context: dict) -> str:
    tol = document["tolerance"]
    u = escape(tol["units"])
    rows = [
        ["tolerance profile", f"{escape(tol['name'])}: {escape(tol.get('description', ''))}"
                              f" <span class=\"small\">({escape(tol.get('origin', ''))})</span>"],
        ["G0 gap", f"{_num(tol['g0_gap'])} {u}"],
        ["G1 angle", f"{_num(tol['g1_angle'])} deg"],
        ["G2 curvature jump", f"{_num(tol['g2_abs'])} 1/{u} or {_num(tol['g2_rel'])} of the larger curvature"],
        ["G3 curvature-rate jump", f"{_num(tol['g3_abs'])} 1/{u}<sup>2</sup> or {_num(tol['g3_rel'])} of the larger rate"],
        ["coverage factor k", _num(tol["coverage"])],
    ]
    rows += [[escape(k), escape(readable(k, v))] for k, v in document["parameters"].items()]
    rows += [[escape(k), escape(str(v))] for k, v in context.items()]
    return ('<section id="parameters"><h2>Parameters and tool</h2>' + _table(None, rows)
            + '<p>The same results as data: <a href="result.json">result.json</a>.</p></section>')


def review_page(document: dict, summary: dict, part_pictures: list[Picture], seam_pictures: dict[str, list[Picture]],
                context: dict, notes: list[str], interactive: str | None = None, exact: dict | None = None) -> str:
    """The whole page as text. ``context``: extra facts for the parameters table (tool and library
    versions, time); ``notes``: cautions beyond the document's own; ``interactive``: the file of the
    interactive 3D view beside the page, linked from the whole-part maps; ``exact``: the grade document
    of the same seams graded exactly on the part's B-rep faces, shown beside the mesh grades."""
    source = escape(document["part"]["source"])
    contents = "".join(f'<li><a href="#{escape(s["id"])}">{escape(s["id"])}: {escape(" | ".join(s["groups"]))}</a></li>'
                       for s in document["seams"])
    maps = "".join(_figure(p) for p in part_pictures)
    if interactive:
        href = escape(interactive, quote=True)
        maps = (f'<p><a href="{href}"><b>Turn the part in 3D</b></a> (opens in the browser, no network needed):'
                " the curvature-jump field with the seams in their result colours; drag to turn, scroll to"
                " zoom.</p>" + maps)
    seams = "".join(_seam_section(s, document, seam_pictures.get(s["id"], [])) for s in document["seams"])
    cautions = "".join(f"<p>{escape(n)}</p>" for n in [document["caution"], *notes])
    return (
        "<!DOCTYPE html>\n"
        f'<html lang="en"><head><meta charset="utf-8"><title>Continuity review: {source}</title>'
        f'<meta name="viewport" content="width=device-width, initial-scale=1"><style>{STYLE}</style></head>'
        f"<body><header><h1>Continuity review: {source}</h1>"
        f'<p class="small">surfcheck {escape(document["tool"]["version"])}, tolerance profile'
        f' {escape(document["tolerance"]["name"])}, {len(document["seams"])} seams</p></header>'
        f"{_reading_box()}"
        f'<div class="caution">{cautions}</div>'
        f'<nav><h2>Contents</h2><ul><li><a href="#verdict">Verdict</a></li><li><a href="#part">Part</a></li>'
        + ('<li><a href="#agreement">Exact beside mesh</a></li>' if exact else "")
        + f'<li><a href="#maps">Whole-part maps</a></li>{contents}<li><a href="#parameters">Parameters and tool</a>'
        "</li></ul></nav>"
        f"{_verdict_section(document)}{_agreement_section(exact, document) if exact else ''}{_part_section(summary)}"
        f'<section id="maps"><h2>Whole-part maps</h2>{maps}</section>{seams}'
        f"{_parameters_section(document, context)}</body></html>\n"
    )
