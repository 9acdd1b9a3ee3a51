"""The inspection report as one self-contained HTML page.

Figures are embedded as base64 PNG ``data:`` URIs and the style sheet is
inline; the page has no script and loads nothing (a Content-Security-Policy
forbids it), so it opens offline in any browser and prints on A4.
"""

from __future__ import annotations

import base64
from html import escape

from .inspection_content import FigureRow, Paragraph, ReportContent, Table

__all__ = ["render_html"]

_VERDICT_TEXT = {"pass": "PASS", "fail": "FAIL", "not judged": "NOT JUDGED", "no spec": "NO SPEC"}

_CSS = """
:root { --ink: #1d232b; --muted: #5b6470; --line: #d5dae1; --soft: #f3f5f8; --accent: #1f3a5f; }
* { box-sizing: border-box; }
html { background: #e9ecf0; }
body { margin: 0; font: 14px/1.45 "Segoe UI", "Helvetica Neue", Arial, "DejaVu Sans", sans-serif;
  color: var(--ink); }
.page { max-width: 1200px; margin: 0 auto; background: #fff; padding: 0 0 24px;
  box-shadow: 0 0 0 1px var(--line); }
header.top { display: flex; align-items: stretch; gap: 24px; padding: 22px 32px 18px;
  border-bottom: 4px solid var(--accent); }
header .id { flex: 1; }
header .kicker { text-transform: uppercase; letter-spacing: .08em; font-size: 12px;
  color: var(--muted); margin: 0 0 2px; }
header h1 { margin: 0; font-size: 26px; font-weight: 650; color: var(--accent); }
header .meta { margin-top: 6px; color: var(--muted); font-size: 13px; }
.verdict { min-width: 230px; max-width: 340px; padding: 12px 16px; border-radius: 6px;
  color: #fff; display: flex; flex-direction: column; justify-content: center; }
.verdict b { font-size: 26px; letter-spacing: .06em; }
.verdict span { font-size: 12.5px; opacity: .95; }
.v-pass { background: #1e7b34; } .v-fail { background: #b3261e; }
.v-not-judged { background: #9a5b00; } .v-no-spec { background: #5f6368; }
.caution { margin: 18px 32px 0; padding: 10px 14px 10px 14px; border: 1px solid #e0b64a;
  border-left: 6px solid #d49a00; background: #fff8e6; border-radius: 4px; font-size: 13.5px; }
.caution b { color: #7a5200; }
.problem { margin: 14px 32px 0; padding: 10px 14px; border-left: 6px solid #b3261e;
  background: #fdecea; border-radius: 4px; font-weight: 600; color: #7d1a14; }
.warnings { margin: 12px 32px 0; padding: 8px 14px; border-left: 6px solid #d49a00;
  background: #fffdf5; border-radius: 4px; font-size: 13.5px; }
.warnings ul { margin: 4px 0 0; padding-left: 20px; }
.warnings.none { border-left-color: #1e7b34; background: #f3faf4; color: #24522f; }
.keys { display: grid; grid-template-columns: repeat(auto-fit, minmax(150px, 1fr)); gap: 10px;
  margin: 18px 32px 0; }
.key { border: 1px solid var(--line); border-radius: 6px; padding: 9px 12px; background: var(--soft); }
.key .label { font-size: 12px; color: var(--muted); text-transform: uppercase; letter-spacing: .04em; }
.key .value { font-size: 21px; font-weight: 650; font-variant-numeric: tabular-nums; }
.key .detail { font-size: 12px; color: var(--muted); }
section { margin: 26px 32px 0; }
section h2 { font-size: 18px; margin: 0 0 10px; padding-bottom: 4px; color: var(--accent);
  border-bottom: 1px solid var(--line); }
section h2 .n { color: var(--muted); font-weight: 500; margin-right: 8px; }
section p { margin: 6px 0 10px; }
p.note { padding: 6px 10px; background: #fff8e6; border-left: 4px solid #d49a00; }
.figs { display: grid; gap: 18px; grid-template-columns: repeat(var(--cols), minmax(0, 1fr)); }
figure { margin: 0; }
figure img { width: 100%; height: auto; display: block; border: 1px solid var(--line); }
figure.single { max-width: 860px; }
figcaption { font-size: 12.5px; color: var(--muted); margin-top: 4px; }
figcaption b { color: var(--ink); }
.tables { display: flex; flex-wrap: wrap; gap: 18px; align-items: flex-start; }
table { border-collapse: collapse; font-size: 13px; font-variant-numeric: tabular-nums;
  margin: 4px 0 6px; }
caption { text-align: left; font-weight: 650; padding: 2px 0 6px; }
th, td { padding: 4px 10px; border-bottom: 1px solid var(--line); vertical-align: top; }
thead th { background: var(--soft); border-bottom: 2px solid #b9c1cc; text-align: left;
  font-weight: 650; }
tbody tr:nth-child(even) td { background: #fafbfc; }
table.compact { font-size: 12.5px; }
table.compact th, table.compact td { padding: 3px 7px; }
td.r, th.r { text-align: right; white-space: nowrap; }
td.c, th.c { text-align: center; }
td.f { color: #44505e; font-family: "DejaVu Sans Mono", Consolas, Menlo, monospace;
  font-size: 12px; }
.tnote { font-size: 12px; color: var(--muted); margin: 0 0 8px; max-width: 1000px; }
footer { margin: 28px 32px 0; padding-top: 10px; border-top: 1px solid var(--line);
  font-size: 12px; color: var(--muted); }
@media print {
  html { background: #fff; }
  .page { box-shadow: none; max-width: none; }
  section { break-inside: auto; }
  figure, table, .keys, .caution, header.top { break-inside: avoid; }
  @page { size: A4; margin: 12mm; }
}
"""


def _figure(fig, single: bool) -> str:
    data = base64.b64encode(fig.png).decode("ascii")
    cls = ' class="single"' if single else ""
    return (
        f'<figure{cls}><img alt="{escape(fig.title)}" width="{fig.width_px}" '
        f'height="{fig.height_px}" src="data:image/png;base64,{data}">'
        f"<figcaption><b>{escape(fig.title)}.</b> {escape(fig.caption)}</figcaption></figure>"
    )


def _table(t: Table) -> str:
    def cls(i: int) -> str:
        if t.formula_column is not None and i == t.formula_column:
            return ' class="f"'
        a = t.align[i] if i < len(t.align) else "l"
        return {"r": ' class="r"', "c": ' class="c"'}.get(a, "")

    head = "".join(
        f"<th{'' if i == t.formula_column else cls(i)}>{escape(h)}</th>"
        for i, h in enumerate(t.header)
    )
    body = "".join(
        "<tr>" + "".join(f"<td{cls(i)}>{escape(c)}</td>" for i, c in enumerate(row)) + "</tr>"
        for row in t.rows
    )
    caption = f"<caption>{escape(t.title)}</caption>" if t.title else ""
    compact = ' class="compact"' if len(t.rows) > 20 else ""  # long site lists, two abreast
    out = f"<table{compact}>{caption}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
    if t.note:
        out += f'<p class="tnote">{escape(t.note)}</p>'
    return out


def _blocks(blocks) -> str:
    parts: list[str] = []
    tables: list[str] = []

    def flush():
        if tables:
            parts.append('<div class="tables">' + "".join(tables) + "</div>")
            tables.clear()

    for b in blocks:
        if isinstance(b, Table):
            # consecutive tables share a row and wrap when they do not fit side by side
            tables.append(f"<div>{_table(b)}</div>")
            continue
        flush()
        if isinstance(b, Paragraph):
            cls = {"note": ' class="note"', "small": ' class="tnote"'}.get(b.style, "")
            parts.append(f"<p{cls}>{escape(b.text)}</p>")
        elif isinstance(b, FigureRow):
            n = len(b.figures)
            figs = "".join(_figure(f, n == 1) for f in b.figures)
            parts.append(f'<div class="figs" style="--cols:{n}">{figs}</div>')
    flush()
    return "".join(parts)


def render_html(content: ReportContent) -> str:
    """The complete HTML document of a report."""
    c = content
    v = c.verdict
    vclass = "v-" + v.replace(" ", "-")
    spec = f"Spec {escape(c.spec_text)}" if c.spec_text else "No spec given"
    keys = "".join(
        f'<div class="key"><div class="label">{escape(k.label)}</div>'
        f'<div class="value">{escape(k.value)}</div><div class="detail">{escape(k.detail)}</div></div>'
        for k in c.key_figures
    )
    sections = "".join(
        f'<section><h2><span class="n">{i}</span>{escape(s.title)}</h2>{_blocks(s.blocks)}</section>'
        for i, s in enumerate(c.sections, start=1)
    )
    problem = f'<div class="problem">{escape(c.problem)}</div>' if c.problem else ""
    if c.warnings:
        items = "".join(f"<li>{escape(w)}</li>" for w in c.warnings)
        warnings = f'<div class="warnings"><b>Warnings and notes</b><ul>{items}</ul></div>'
    else:
        warnings = '<div class="warnings none">No warnings.</div>'
    csp = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="{csp}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="{escape(c.software)}">
<title>{escape(c.title)}: {escape(c.sample)}</title>
<style>{_CSS}</style>
</head>
<body>
<div class="page">
<header class="top">
<div class="id">
<p class="kicker">{escape(c.title)}</p>
<h1>{escape(c.sample)}</h1>
<div class="meta">{spec} · generated {escape(c.generated)} · {escape(c.software)}</div>
</div>
<div class="verdict {vclass}"><b>{_VERDICT_TEXT.get(v, escape(v.upper()))}</b>
<span>{escape(c.verdict_reason)}</span></div>
</header>
<div class="caution"><b>Caution.</b> {escape(c.caution)}</div>
{problem}
{warnings}
<div class="keys">{keys}</div>
{sections}
<footer>{escape(c.software)} · {escape(c.sample)} · report generated {escape(c.generated)}.
Formulas: docs/statistics.md.</footer>
</div>
</body>
</html>
"""
