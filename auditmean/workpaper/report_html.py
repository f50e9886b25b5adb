"""The workpaper as one self-contained HTML file, interactive and printable.

The report holds the same sheets as the workbook, in the same order, with
the pictures of :mod:`auditmean.workpaper.figures`. It works offline:
plotly.js is embedded once, in the head, and every figure is drawn by a
short script of our own; nothing is fetched when the file is opened (no
remote script, style sheet, font or image; a Content-Security-Policy in
the head forbids any network access, so a browser would refuse it even if
something asked, and lets run only the scripts whose SHA-256 hashes it
lists: the report's own, so a script that slipped into the page some other
way would not run either).

Every ``<script>`` element the report contains carries the attribute
``data-auditmean``: ``"plotly-bundle"`` for plotly.js, ``"figure"`` for a
figure's initialisation, ``"print"`` for the one that redraws the figures
at the printed width. Text from the user's files is HTML-escaped
(:func:`html.escape`) wherever it appears, and the figure data inside the
scripts is JSON with ``<``, ``>`` and ``&`` written as ``\\u003c``,
``\\u003e`` and ``\\u0026``, so no text can close a script or open a tag.

Numeric cells carry their exact value in ``data-value`` (Python's ``repr``
of the float), so a program can read the engine's numbers back from the
report; the text shown is rounded for people.
"""

from __future__ import annotations

import base64
import hashlib
import html
import os
from pathlib import Path
from typing import Any

import plotly.graph_objects as go
import plotly.io as pio
from plotly.offline import get_plotlyjs

from auditmean._atomic import write_text_atomic
from auditmean.workpaper import figures as figs
from auditmean.workpaper._content import Workpaper
from auditmean.workpaper._document import (
    Fields,
    Figure,
    Heading,
    Paragraph,
    Sheet,
    Table,
    display,
    is_number,
    visible,
)
from auditmean.workpaper._sheets import build_sheets

__all__ = ["SCRIPT_ATTRIBUTE", "CONTENT_SECURITY_POLICY", "report_html", "save_html", "figures_for"]

#: The attribute every script element of the report carries, with its role as value.
SCRIPT_ATTRIBUTE = "data-auditmean"

#: No network access of any kind; only the report's own scripts run (``{scripts}``: their SHA-256 hashes).
CONTENT_SECURITY_POLICY = (
    "default-src 'none'; script-src {scripts}; style-src 'unsafe-inline'; "
    "img-src data: blob:; font-src data:; connect-src 'none'; form-action 'none'; base-uri 'none'"
)

_NUMERIC = ("money", "int", "pct", "num2", "num3", "num4")
_PLOT_CONFIG = '{"displaylogo": false, "responsive": true, "displayModeBar": "hover"}'

_CSS = """
:root { --ink: #1d2733; --muted: #5a6673; --rule: #c9d5e2; --head: #dce6f0; --caution: #fbede6; --warn: #7a2e0e; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
       color: var(--ink); margin: 0 auto; max-width: 1180px; padding: 24px 28px 60px; line-height: 1.45; font-size: 14px; }
h1 { font-size: 26px; margin: 0 0 4px; }
h2 { font-size: 20px; margin: 36px 0 6px; padding-top: 10px; border-top: 2px solid var(--rule); }
h3 { font-size: 15px; margin: 22px 0 6px; }
.am-sub, .am-sheetname { color: var(--muted); margin: 0 0 12px; font-size: 13px; }
.am-caution { background: var(--caution); border-left: 4px solid var(--warn); color: var(--warn);
              font-weight: 600; padding: 6px 10px; margin: 6px 0; }
.am-note { border-left: 4px solid var(--warn); padding: 4px 10px; margin: 6px 0; font-style: italic; color: var(--warn); }
.am-code, code { font-family: ui-monospace, "SFMono-Regular", Consolas, "Liberation Mono", monospace; font-size: 12.5px;
                 overflow-wrap: anywhere; }
p.am-code { white-space: pre-wrap; background: #f5f7fa; padding: 6px 10px; }
.am-scroll { overflow-x: auto; margin: 8px 0 14px; }
table { border-collapse: collapse; font-size: 13px; }
caption { text-align: left; font-style: italic; color: var(--muted); padding: 4px 0; }
th, td { border-bottom: 1px solid var(--rule); padding: 3px 8px; vertical-align: top; text-align: left; }
thead th { background: var(--head); position: sticky; top: 0; }
td { white-space: pre-wrap; overflow-wrap: break-word; }
td.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.wide { min-width: 160px; max-width: 520px; overflow-wrap: anywhere; }
td.am-code { max-width: 560px; overflow-wrap: anywhere; }
table.am-fields th { font-weight: 600; max-width: 420px; }
nav.am-contents ol { columns: 3; margin: 6px 0 0; }
.am-figure { width: 100%; height: 430px; margin: 10px 0 4px; }
.am-figcaption { color: var(--muted); font-size: 12.5px; margin: 0 0 16px; }
@page { size: A4 landscape; margin: 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  nav.am-contents, .modebar-container { display: none !important; }
  h2 { break-before: page; border-top: none; margin-top: 0; }
  section#summary h2 { break-before: auto; }
  h2, h3, caption { break-after: avoid; }
  table { font-size: 8pt; }
  thead { display: table-header-group; }
  tr, .am-figure, .am-caution, .am-note { break-inside: avoid; }
  thead th { position: static; }
  .am-scroll { overflow: visible; }
  .am-figure { width: 100%; }
  a { color: inherit; text-decoration: none; }
}
"""

_PRINT_SCRIPT = (
    "(function(){function r(){document.querySelectorAll('.am-figure').forEach(function(d){"
    "if(window.Plotly&&d.data){Plotly.Plots.resize(d);}});}"
    "window.addEventListener('beforeprint',r);window.addEventListener('afterprint',r);})();"
)


def visible_text(text: Any) -> str:
    """Escaped text for HTML, with control characters shown as control pictures."""
    return html.escape(visible(str(text)), quote=True)


def _script_json(text: str) -> str:
    """JSON text made safe inside a script element."""
    return (
        text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
        .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    )


class _Scripts:
    """The report's scripts: each is written once and its hash goes into the Content-Security-Policy."""

    def __init__(self) -> None:
        self.hashes: list[str] = []

    def element(self, role: str, text: str, target: str | None = None) -> str:
        digest = base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii")
        self.hashes.append(f"'sha256-{digest}'")
        extra = f' data-target="{target}"' if target else ""
        return f'<script {SCRIPT_ATTRIBUTE}="{role}"{extra}>{text}</script>'


def _figure_html(fig: go.Figure, div_id: str, caption: str, scripts: _Scripts) -> str:
    spec = _script_json(pio.to_json(fig, validate=False, pretty=False))
    code = f'(function(){{var f={spec};Plotly.newPlot("{div_id}",f.data,f.layout,{_PLOT_CONFIG});}})();'
    return (
        f'<div id="{div_id}" class="am-figure" role="img" aria-label="{visible_text(caption)}"></div>'
        + scripts.element("figure", code, div_id)
        + f'<p class="am-figcaption">{visible_text(caption)}</p>'
    )


def figures_for(wp: Workpaper) -> dict[str, go.Figure]:
    """Every picture of the report, by the key its :class:`Figure` block names."""
    out: dict[str, go.Figure] = {}
    if wp.monetary:
        return _monetary_figures(wp)
    strata = wp.strata
    out["distribution"] = figs.book_value_distribution(
        wp.population.book_values, strata.get("boundaries") or (), strata.get("top_cutoff")
    )
    t = wp.plan.table
    labels = [str(s) for s in t["stratum"]]
    out["value_share"] = figs.stratum_shares(labels, t["count"].tolist(), t["book_total"].tolist())
    out["allocation"] = figs.allocation_bars(labels, t["count"].tolist(), t["size"].tolist(), t["take_all"].tolist())
    ev = wp.evaluation
    if ev is not None:
        first = ev["estimates"][ev["primary"]]
        out["estimate"] = figs.estimate_limits(
            figs.evaluation_estimates(ev), first["book_total"], ev["tolerable"], primary=ev["primary"],
            confidence=first["confidence"], finite_bound=(ev.get("overstatement_bound") or {}).get("upper"),
        )
    for i, (_, cov) in enumerate(wp.coverage):
        rows = list(cov.get("by_estimator") or [])
        conf = cov.get("confidence")
        if rows and is_number(conf):
            out[f"coverage:{i}"] = figs.coverage_by_estimator(rows, float(conf))
            if any(k in rows[0] for k in ("risk_incorrect_acceptance", "risk_incorrect_rejection")):
                out[f"coverage_risks:{i}"] = figs.coverage_risks(rows, 1.0 - float(conf))
    return out


def _monetary_figures(wp: Workpaper) -> dict[str, go.Figure]:
    from auditmean.workpaper._monetary_sheets import bound_name

    mp = wp.monetary_plan
    out = {
        "distribution": figs.book_value_distribution(
            wp.population.book_values, (), mp.interval, top_label="examined in full from the sampling interval"
        )
    }
    ev = wp.evaluation
    if ev is not None and ev.get("bounds"):
        rows = figs.monetary_bound_rows(ev)
        out["bounds"] = figs.monetary_bounds(rows, ev["tolerable"], names={r["method"]: bound_name(r["method"]) for r in rows})
    return out


def _cell(value: Any, fmt: str, wide: bool = False) -> str:
    shown = visible_text(display(value, fmt))
    if fmt in _NUMERIC and is_number(value) and not isinstance(value, bool):
        exact = str(int(value)) if fmt == "int" and float(value).is_integer() else repr(float(value))
        return f'<td class="num" data-value="{html.escape(exact)}">{shown}</td>'
    cls = ' class="am-code"' if fmt == "code" else (' class="wide"' if wide else "")
    return f'<td dir="auto"{cls}>{shown}</td>'


def _table(t: Table) -> str:
    parts = ['<div class="am-scroll"><table>']
    if t.caption:
        parts.append(f"<caption>{visible_text(t.caption)}</caption>")
    parts.append("<thead><tr>" + "".join(f'<th scope="col">{visible_text(c.name)}</th>' for c in t.columns) + "</tr></thead>")
    parts.append("<tbody>")
    for r in t.rows:
        parts.append("<tr>" + "".join(_cell(v, c.fmt, c.wide) for c, v in zip(t.columns, r)) + "</tr>")
    if not t.rows:
        parts.append(f'<tr><td colspan="{len(t.columns)}">(none)</td></tr>')
    parts.append("</tbody></table></div>")
    return "".join(parts)


def _fields(f: Fields) -> str:
    rows = "".join(f'<tr><th scope="row">{visible_text(label)}</th>{_cell(v, fmt)}</tr>' for label, v, fmt in f.rows)
    return f'<div class="am-scroll"><table class="am-fields"><tbody>{rows}</tbody></table></div>'


def _paragraph(p: Paragraph) -> str:
    cls = {"caution": "am-caution", "note": "am-note", "code": "am-code"}.get(p.kind)
    attr = f' class="{cls}"' if cls else ""
    return f'<p dir="auto"{attr}>{visible_text(p.text)}</p>'


def _section(sheet: Sheet, figures: dict[str, go.Figure], counter: list[int], scripts: _Scripts) -> str:
    parts = [
        f'<section id="{sheet.anchor}" class="am-sheet">',
        f"<h2>{visible_text(sheet.title)}</h2>",
        f'<p class="am-sheetname">Workbook sheet: {visible_text(sheet.name)}</p>',
    ]
    for block in sheet.blocks:
        if isinstance(block, Heading):
            parts.append(f"<h3>{visible_text(block.text)}</h3>")
        elif isinstance(block, Paragraph):
            parts.append(_paragraph(block))
        elif isinstance(block, Fields):
            parts.append(_fields(block))
        elif isinstance(block, Table):
            parts.append(_table(block))
        elif isinstance(block, Figure):
            fig = figures.get(block.key)
            if fig is not None:
                counter[0] += 1
                parts.append(_figure_html(fig, f"am-figure-{counter[0]}", block.caption, scripts))
        else:  # pragma: no cover - every block type is handled above
            raise TypeError(f"unknown block {type(block).__name__}")
    parts.append("</section>")
    return "".join(parts)


def report_html(wp: Workpaper) -> str:
    """The whole report as one HTML document (text)."""
    sheets = build_sheets(wp)
    figures = figures_for(wp)
    counter = [0]
    scripts = _Scripts()
    contents = "".join(f'<li><a href="#{s.anchor}">{visible_text(s.title)}</a></li>' for s in sheets[1:])
    summary, rest = sheets[0], sheets[1:]
    body = [
        "<header>",
        f"<h1>{visible_text(summary.title)}</h1>",
        f'<p class="am-sub">Engagement <span class="am-code">{visible_text(wp.folder)}</span>; written '
        f"{visible_text(wp.generated_at)} by auditmean {visible_text(wp.tool_version)}</p>",
        "</header>",
        _section(Sheet(summary.name, summary.anchor, "Summary", summary.blocks), figures, counter, scripts),
        f'<nav class="am-contents" aria-label="Contents"><h3>Contents</h3><ol>{contents}</ol></nav>',
    ]
    body += [_section(s, figures, counter, scripts) for s in rest]
    bundle = get_plotlyjs()
    if "</script" in bundle.lower():  # pragma: no cover - plotly.js never holds it; refuse rather than break the page
        raise RuntimeError("the plotly.js bundle holds '</script' and cannot be embedded")
    bundle_element = scripts.element("plotly-bundle", bundle)
    print_element = scripts.element("print", _PRINT_SCRIPT)
    csp = CONTENT_SECURITY_POLICY.format(scripts=" ".join(scripts.hashes))
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f'<meta http-equiv="Content-Security-Policy" content="{csp}">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        '<meta name="generator" content="auditmean">\n'
        f"<title>Sampling workpaper - {visible_text(Path(wp.folder).name)}</title>\n"
        f"<style>{_CSS}</style>\n"
        f"{bundle_element}\n"
        "</head>\n<body>\n"
        + "\n".join(body)
        + f"\n{print_element}\n</body>\n</html>\n"
    )


def save_html(wp: Workpaper, path: str | os.PathLike[str]) -> Path:
    """Write the report to ``path`` atomically (UTF-8)."""
    target = Path(path)
    write_text_atomic(target, report_html(wp))
    return target
