"""The report as one self-contained HTML page: inline CSS, inline SVG, one small inline script.

Nothing in the page refers to another file or address: no stylesheet, font, image or script is
fetched, so it opens the same offline, attached to a mail or archived. It prints on A4 (``@page``
size and margins, drawings kept whole on a page, the table's header repeated), so a browser can
save it as PDF. The curve table is ``<table id="curves">`` with one ``<tr>`` per curve in its
``<tbody>``, each cell carrying its sort value in ``data-sort``, so scripts can read it too; the
script only sorts it when a header is clicked (the page reads fully without scripts).
"""

from __future__ import annotations

import html
import math

from ..io._format import printable
from .model import CAUTIONS, ReportCurve, ReportData
from .svg import plan_svg, speed_svg, use_svg

STYLE = """
:root { --ink: #1a1a1a; --muted: #555; --rule: #d9d9d9; --fail: #D55E00; --bound: #E69F00;
        --pass: #0072B2; }
* { box-sizing: border-box; }
body { font: 14px/1.45 system-ui, sans-serif; color: var(--ink); margin: 0 auto;
       max-width: 820px; padding: 16px; }
h1 { font-size: 22px; margin: 0 0 4px; } h2 { font-size: 17px; margin: 22px 0 6px;
     border-bottom: 1px solid var(--rule); padding-bottom: 2px; }
.verdict { display: inline-block; padding: 2px 10px; border: 2px solid; font-weight: bold; }
.verdict.pass { color: var(--pass); } .verdict.fail { color: var(--fail); }
figure { margin: 8px 0 14px; break-inside: avoid; page-break-inside: avoid; }
figure svg { width: 100%; height: auto; display: block; }
figcaption, .note, .legend { color: var(--muted); font-size: 12px; }
.legend span { margin-right: 14px; white-space: nowrap; }
.swatch { display: inline-block; width: 22px; height: 10px; vertical-align: middle;
          margin-right: 4px; border: 1px solid #999; }
table { border-collapse: collapse; width: 100%; font-size: 12px; }
th, td { border-bottom: 1px solid var(--rule); padding: 3px 5px; text-align: right;
         vertical-align: top; }
th:first-child, td:first-child, .kv th, .kv td { text-align: left; }
thead { display: table-header-group; }
tr { break-inside: avoid; page-break-inside: avoid; }
th button { font: inherit; font-weight: bold; border: 0; background: none; padding: 0;
            cursor: pointer; text-align: inherit; color: inherit; }
th[aria-sort="ascending"] button::after { content: " \\25B2"; }
th[aria-sort="descending"] button::after { content: " \\25BC"; }
td.fail { color: var(--fail); font-weight: bold; } td.fails_on_bound { color: #8a5a00;
          font-weight: bold; }
.kv th { width: 34%; font-weight: normal; color: var(--muted); }
.hash { font-family: ui-monospace, monospace; font-size: 11px; word-break: break-all; }
.cautions li { margin-bottom: 4px; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 11px; }
  h2 { break-after: avoid; page-break-after: avoid; }
  section.table { break-before: page; page-break-before: always; }
  th button::after { content: "" !important; }
}
"""

SCRIPT = """
(function () {
  var table = document.getElementById('curves');
  if (!table) { return; }
  var heads = table.tHead.rows[0].cells;
  function key(cell) {
    var raw = cell.getAttribute('data-sort');
    var num = parseFloat(raw);
    return isNaN(num) ? raw : num;
  }
  Array.prototype.forEach.call(heads, function (th, col) {
    var button = th.querySelector('button');
    if (!button) { return; }
    button.addEventListener('click', function () {
      var up = th.getAttribute('aria-sort') !== 'ascending';
      Array.prototype.forEach.call(heads, function (h) { h.removeAttribute('aria-sort'); });
      th.setAttribute('aria-sort', up ? 'ascending' : 'descending');
      var body = table.tBodies[0];
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = key(a.cells[col]), y = key(b.cells[col]);
        var order = (typeof x === typeof y) ? (x < y ? -1 : x > y ? 1 : 0)
                                            : (typeof x === 'number' ? -1 : 1);
        return up ? order : -order;
      });
      rows.forEach(function (r) { body.appendChild(r); });
    });
  });
})();
"""

#: How each verdict reads in the table.
VERDICT_TEXT = {"pass": "pass", "fail": "FAIL", "fails_on_bound": "FAIL (within uncertainty)"}


def _esc(text) -> str:
    """``text`` for the page: markup escaped, characters XML forbids replaced (a control
    character in a stop's or route's name)."""
    return html.escape(printable(str(text)), quote=True)


def _radius(c: ReportCurve) -> str:
    high = "unbounded" if math.isinf(c.radius_high_m) else f"{c.radius_high_m:.0f}"
    return f"{c.radius_m:.1f} ({c.radius_low_m:.0f}–{high})"


def _advisory(c: ReportCurve) -> str:
    if c.advisory_kmh is None:
        return "–"
    low = "–" if c.advisory_low_kmh is None else c.advisory_low_kmh
    high = "–" if c.advisory_high_kmh is None else c.advisory_high_kmh
    return f"{c.advisory_kmh} ({low}–{high})"


def _sort_number(value) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "1e308" if value == math.inf else ""
    return repr(float(value))


#: The curve table's columns: header, and the cell of a curve (shown text, sort value).
COLUMNS = (
    ("#", lambda c: (c.number, c.number)),
    ("stations (m)", lambda c: (f"{c.start_m:.0f}–{c.end_m:.0f}", c.start_m)),
    ("direction", lambda c: (c.direction, c.direction)),
    ("radius (m): estimate (plausible)", lambda c: (_radius(c), c.radius_m)),
    ("speed (m/s)", lambda c: (f"{c.speed_mps:.2f}", c.speed_mps)),
    ("limit (m/s)", lambda c: (f"{c.limit_speed_mps:.2f}", c.limit_speed_mps)),
    ("grip use (%)", lambda c: (f"{100 * c.grip_use:.1f}", c.grip_use)),
    ("comfort use (%)", lambda c: (f"{100 * c.comfort_use:.1f}", c.comfort_use)),
    ("braking", lambda c: ("ok" if c.brake_ok else "LATE", int(c.brake_ok))),
    ("advisory (km/h)", lambda c: (_advisory(c), c.advisory_kmh)),
    ("advisory (mph)", lambda c: ("–" if c.advisory_mph is None else c.advisory_mph,
                                  c.advisory_mph)),
    ("result", lambda c: (VERDICT_TEXT.get(c.verdict, c.verdict), c.verdict)),
)


def curve_table(curves) -> str:
    """``<table id="curves">``: one row per curve, in the check table's numbering."""
    head = "".join(f'<th scope="col"><button type="button">{_esc(name)}</button></th>'
                   for name, _ in COLUMNS)
    rows = []
    for c in curves:
        cells = []
        for i, (_, cell) in enumerate(COLUMNS):
            text, sort = cell(c)
            sort_text = sort if isinstance(sort, str) else _sort_number(sort)
            cls = f' class="{c.verdict}"' if i == len(COLUMNS) - 1 else ""
            cells.append(f'<td data-sort="{_esc(sort_text)}"{cls}>{_esc(text)}</td>')
        rows.append(f'<tr data-curve="{c.number}">' + "".join(cells) + "</tr>")
    return (f'<table id="curves"><thead><tr>{head}</tr></thead>\n<tbody>\n' + "\n".join(rows)
            + "\n</tbody></table>")


def _key_values(rows, ident: str) -> str:
    body = "".join(f'<tr><th scope="row">{_esc(k)}</th><td class="{"hash" if "sha256" in k else ""}">'
                   f"{_esc(v)}</td></tr>" for k, v in rows)
    return f'<table class="kv" id="{ident}"><tbody>{body}</tbody></table>'


def _legend(items) -> str:
    spans = "".join(f'<span><i class="swatch" style="{style}"></i>{_esc(text)}</span>'
                    for style, text in items)
    return f'<p class="legend">{spans}</p>'


def report_html(data: ReportData) -> str:
    """The whole report page as text (module docstring)."""
    failing = [c for c in data.curves if c.verdict != "pass"]
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_esc(data.title)}</title><style>{STYLE}</style></head><body>",
        f"<header><h1>{_esc(data.title)}</h1>",
        f'<p><span class="verdict {_esc(data.verdict)}" id="verdict">'
        f'{"PASS" if data.verdict == "pass" else "FAIL"}</span> '
        f"{len(data.curves)} curve(s), {len(failing)} failing; {len(data.violations)} "
        "violation(s) in all.</p>",
        f"<p>{_esc(data.what)}</p>",
    ]
    parts += [f'<p class="note">{_esc(note)}</p>' for note in data.notes]
    parts += ["</header>", '<section class="plan"><h2>Route and curves</h2><figure>',
              plan_svg(data),
              "<figcaption>The route in plan (x east, y north, to scale). Numbered discs mark "
              "the curves as in the curve table, at their tightest point, with the ball-bank "
              "advisory speed on the curvature estimate; failing curves are dashed.</figcaption>"
              "</figure></section>",
              '<section class="speed"><h2>Speed along the route</h2><figure>', speed_svg(data),
              _legend([("background:#0072B2", "speed"),
                       ("background:#fff;border:1px dashed #6E6E6E", "speed ceiling"),
                       ("background:#56B4E9;opacity:.5", "curve (numbered)"),
                       *[(style, text) for verdict, style, text in (
                           ("fail", "background:#D55E00;opacity:.45", "failing curve"),
                           ("fails_on_bound", "background:#E69F00;opacity:.45",
                            "failing within the uncertainty"))
                         if any(c.verdict == verdict for c in failing)],
                       ("background:repeating-linear-gradient(45deg,#D55E00 0 2px,#fbe3d3 2px 5px)",
                        "braking"),
                       ("background:#009E73;opacity:.35", "launch (speeding up)")]),
              "</figure><figure>", use_svg(data),
              _legend([("background:#0072B2", "grip use (friction ellipse)"),
                       ("background:repeating-linear-gradient(90deg,#E69F00 0 6px,#fff 6px 9px)",
                        "comfort use"), ("border-top:2px dashed #000;height:0", "100 %")]),
              "<figcaption>Use of each limit, 100 % = at the limit, judged on the curvature's "
              "bound.</figcaption></figure></section>",
              '<section class="table"><h2>Curves</h2>',
              '<p class="note">Radius and advisory speed: the estimate, with the smallest and '
              "largest plausible values in brackets. Uses are judged on the curvature's bound. "
              "Click a header to sort.</p>", curve_table(data.curves), "</section>"]
    if data.violations:
        items = "".join(f"<li>{_esc(v)}</li>" for v in data.violations)
        parts.append(f'<section><h2>Violations</h2><ul id="violations">{items}</ul></section>')
    parts += ['<section><h2>Limits and route constraints</h2>', _key_values(data.limits, "limits"), "</section>",
              '<section><h2>Provenance</h2>', _key_values(data.provenance, "provenance"),
              "</section>", '<section class="cautions"><h2>Cautions</h2><ul id="cautions">',
              "".join(f"<li>{_esc(c)}</li>" for c in CAUTIONS), "</ul></section>",
              f"<script>{SCRIPT}</script></body></html>", ""]
    return "\n".join(parts)
