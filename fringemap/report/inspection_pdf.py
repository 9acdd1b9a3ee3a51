"""The inspection report as an A4 PDF, drawn with matplotlib (``PdfPages``).

The same :class:`~fringemap.report.inspection_content.ReportContent` as the
HTML page is laid out top to bottom in points (1/72 in): a small flow layout
measures text with the Agg renderer, wraps paragraphs and table cells, and
starts a new page when a block does not fit (long tables continue with their
header repeated). Figures are the report's PNGs, resampled to about 200 dpi
at their printed size.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import cv2
import numpy as np

from .inspection_content import FigureRow, Paragraph, ReportContent, Table

__all__ = ["render_pdf"]

PAGE_W, PAGE_H = 595.28, 841.89  # A4, pt
MARGIN = 40.0
CONTENT_W = PAGE_W - 2 * MARGIN
TOP = PAGE_H - 58.0  # below the running header
BOTTOM = 46.0  # above the running footer
IMAGE_DPI = 200.0

ACCENT = "#1f3a5f"
MUTED = "#5b6470"
LINE = "#d5dae1"
SOFT = "#f3f5f8"
VERDICT_COLOURS = {
    "pass": "#1e7b34",
    "fail": "#b3261e",
    "not judged": "#9a5b00",
    "no spec": "#5f6368",
}


class _Metrics:
    """Text widths in points as the PDF draws them (unhinted glyph advances).

    Each character's advance is measured once per weight and family at 100 pt
    with :class:`matplotlib.textpath.TextToPath` and summed (kerning is
    ignored: a few tenths of a percent for the default font).
    """

    def __init__(self) -> None:
        from matplotlib.font_manager import FontProperties
        from matplotlib.textpath import TextToPath

        self._t2p = TextToPath()
        self._fp = FontProperties
        self._props: dict = {}
        self._chars: dict = {}

    def _advance(self, ch: str, weight: str, family: str) -> float:
        key = (ch, weight, family)
        if key not in self._chars:
            prop = self._props.get((weight, family))
            if prop is None:
                prop = self._fp(size=100.0, weight=weight, family=family)
                self._props[(weight, family)] = prop
            # the advance of a character between two others (spaces have no ink)
            w2, _, _ = self._t2p.get_text_width_height_descent(f"x{ch}x", prop, ismath=False)
            w0, _, _ = self._t2p.get_text_width_height_descent("xx", prop, ismath=False)
            self._chars[key] = (w2 - w0) / 100.0
        return self._chars[key]

    def width(self, text: str, size: float, weight: str = "normal", family: str = "sans-serif"):
        """Width of ``text`` at ``size`` pt, in pt."""
        # 3 % spare: drawn lines measure up to 2 % wider than the sum of advances
        return 1.03 * size * sum(self._advance(ch, weight, family) for ch in text)

    def wrap(
        self, text: str, width: float, size: float, weight: str = "normal", family="sans-serif"
    ):
        """Greedy word wrap of ``text`` into lines no wider than ``width`` pt."""
        lines: list[str] = []
        for para in text.split("\n"):
            line = ""
            for word in para.split(" "):
                trial = word if not line else f"{line} {word}"
                if line and self.width(trial, size, weight, family) > width:
                    lines.append(line)
                    line = word
                else:
                    line = trial
            lines.append(line)
        return lines


@dataclass
class _Page:
    ops: list = field(default_factory=list)


class _Flow:
    """Places blocks top to bottom, page by page."""

    def __init__(self, metrics: _Metrics) -> None:
        self.m = metrics
        self.pages: list[_Page] = []
        self.new_page()

    def new_page(self) -> None:
        self.pages.append(_Page())
        self.y = TOP

    @property
    def ops(self) -> list:
        return self.pages[-1].ops

    def need(self, height: float) -> None:
        if self.y - height < BOTTOM and self.y < TOP - 1:
            self.new_page()

    def text(
        self, x, y, s, size, *, weight="normal", colour="black", ha="left", family="sans-serif"
    ):
        self.ops.append(("text", x, y, s, size, weight, colour, ha, family))

    def rect(self, x, y, w, h, face, edge="none", lw=0.0):
        self.ops.append(("rect", x, y, w, h, face, edge, lw))

    def hline(self, x0, x1, y, colour=LINE, lw=0.6):
        self.ops.append(("line", x0, x1, y, colour, lw))

    def paragraph(self, text, size=8.5, colour="black", indent=0.0, weight="normal", gap=5.0):
        lead = size * 1.35
        for line in self.m.wrap(text, CONTENT_W - indent, size, weight):
            self.need(lead)
            self.y -= lead
            self.text(
                MARGIN + indent, self.y + 0.25 * size, line, size, weight=weight, colour=colour
            )
        self.y -= gap

    def boxed(self, text, *, label, face, edge, colour, size=8.5):
        lead = size * 1.35
        lines = self.m.wrap(f"{label} {text}", CONTENT_W - 20, size)
        h = len(lines) * lead + 12
        self.need(h + 6)
        top = self.y
        self.rect(MARGIN, top - h, CONTENT_W, h, face, edge, 0.8)
        self.rect(MARGIN, top - h, 4, h, edge)
        y = top - 6
        for i, line in enumerate(lines):
            y -= lead
            if i == 0 and line.startswith(label):
                self.text(MARGIN + 12, y + 0.25 * size, label, size, weight="bold", colour=colour)
                off = self.m.width(label + " ", size, "bold")
                self.text(MARGIN + 12 + off, y + 0.25 * size, line[len(label) + 1 :], size)
            else:
                self.text(MARGIN + 12, y + 0.25 * size, line, size)
        self.y = top - h - 10

    def place(self, block) -> None:
        """Lay out one block (Paragraph, Table or FigureRow)."""
        if isinstance(block, Paragraph):
            if block.style == "small":
                self.paragraph(block.text, size=7, colour=MUTED, gap=4)
            else:
                self.paragraph(block.text, colour="#7a5200" if block.style == "note" else "black")
        elif isinstance(block, Table):
            self.table(block)
        elif isinstance(block, FigureRow):
            self.figures(block)

    def height_of(self, blocks) -> float:
        """Height the blocks take from the top of an empty page (a page at most)."""
        probe = _Flow(self.m)
        for block in blocks:
            probe.place(block)
        return TOP - BOTTOM if len(probe.pages) > 1 else TOP - probe.y

    def heading(self, text, number, keep: float = 0.0):
        """A section heading, kept on one page with the ``keep`` pt that follow it."""
        self.need(31 + min(keep, TOP - BOTTOM - 31))
        self.y -= 20
        self.text(MARGIN, self.y, f"{number}", 12, colour=MUTED)
        self.text(MARGIN + 16, self.y, text, 12, weight="bold", colour=ACCENT)
        self.y -= 5
        self.hline(MARGIN, MARGIN + CONTENT_W, self.y)
        self.y -= 6

    # -------------------------------------------------------------------- tables

    def table(self, t: Table) -> None:
        m = self.m
        for size in (7.5, 7.0, 6.5, 6.0):
            widths = self._column_widths(t, size)
            if widths is not None:
                break
        pad = 4.0
        lead = size * 1.3

        def cell_lines(text, i, bold=False):
            return m.wrap(text, widths[i] - 2 * pad, size, "bold" if bold else "normal")

        def draw_row(cells, bold=False, shade=None):
            wrapped = [cell_lines(c, i, bold) for i, c in enumerate(cells)]
            h = max(len(w) for w in wrapped) * lead + 4
            top = self.y
            if shade:
                self.rect(MARGIN, top - h, sum(widths), h, shade)
            x = MARGIN
            for i, lines in enumerate(wrapped):
                align = t.align[i] if i < len(t.align) else "l"
                is_formula = t.formula_column == i and not bold
                colour = "#44505e" if is_formula else "black"
                for k, line in enumerate(lines):
                    y = top - 2 - (k + 1) * lead + 0.3 * size
                    if align == "r" and not bold:
                        self.text(x + widths[i] - pad, y, line, size, colour=colour, ha="right")
                    elif align == "c" and not bold:
                        self.text(x + widths[i] / 2, y, line, size, colour=colour, ha="center")
                    else:
                        self.text(
                            x + pad,
                            y,
                            line,
                            size,
                            weight="bold" if bold else "normal",
                            colour=colour,
                        )
                x += widths[i]
            self.y = top - h
            self.hline(
                MARGIN,
                MARGIN + sum(widths),
                self.y,
                "#b9c1cc" if bold else LINE,
                0.8 if bold else 0.4,
            )
            return h

        def height(cells, bold=False):
            return max(len(cell_lines(c, i, bold)) for i, c in enumerate(cells)) * lead + 4

        title_h = 15.0 if t.title else 0.0
        total = title_h + height(t.header, True) + sum(height(r) for r in t.rows) + 8
        if t.note:
            total += len(m.wrap(t.note, CONTENT_W, 7)) * 7 * 1.35 + 2
        if total <= TOP - BOTTOM:
            self.need(total)  # keep a table that fits on one page together
        else:
            self.need(title_h + height(t.header, True) + 3 * lead)
        if t.title:
            self.y -= 11
            self.text(MARGIN, self.y, t.title, 8.5, weight="bold")
            self.y -= 4
        draw_row(t.header, bold=True, shade=SOFT)
        for j, row in enumerate(t.rows):
            if self.y - height(row) < BOTTOM:
                self.new_page()
                title = f"{t.title} (continued)" if t.title else "(continued)"
                self.text(MARGIN, self.y - 11, title, 8.5, weight="bold")
                self.y -= 15
                draw_row(t.header, bold=True, shade=SOFT)
            draw_row(row, shade="#fafbfc" if j % 2 else None)
        self.y -= 4
        if t.note:
            self.paragraph(t.note, size=7, colour=MUTED, gap=2)
        self.y -= 4

    def _column_widths(self, t: Table, size: float):
        m = self.m
        pad = 8.0
        natural = []
        for i in range(len(t.header)):
            cells = [t.header[i]] + [r[i] for r in t.rows if i < len(r)]
            w = max(m.width(c, size, "bold" if k == 0 else "normal") for k, c in enumerate(cells))
            natural.append(w + pad + 2.0)
        if sum(natural) <= CONTENT_W:
            return natural
        flexible = [i for i, a in enumerate(t.align) if a == "l"]
        fixed = sum(w for i, w in enumerate(natural) if i not in flexible)
        room = CONTENT_W - fixed
        if not flexible or room < 60 * len(flexible):
            return None if size > 6.0 else [CONTENT_W / len(natural)] * len(natural)
        want = sum(natural[i] for i in flexible)
        out = list(natural)
        for i in flexible:
            out[i] = max(60.0, room * natural[i] / want)
        scale = room / sum(out[i] for i in flexible)
        for i in flexible:
            out[i] *= scale
        return out

    # ------------------------------------------------------------------- figures

    def figures(self, row: FigureRow) -> None:
        n = len(row.figures)
        gap = 12.0
        width = (CONTENT_W - gap * (n - 1)) / n
        max_h = 300.0 if n == 1 else 330.0
        sizes = []
        for f in row.figures:
            w = width if n > 1 else min(width, 470.0)
            h = w * f.height_px / f.width_px
            if h > max_h:
                w, h = max_h * f.width_px / f.height_px, max_h
            sizes.append((w, h))
        img_h = max(h for _, h in sizes)
        captions = [self.m.wrap(f"{f.title}. {f.caption}", width, 7) for f in row.figures]
        cap_h = max(len(c) for c in captions) * 7 * 1.3
        self.need(img_h + cap_h + 10)
        top = self.y - 4
        x = MARGIN
        for f, (w, h), cap in zip(row.figures, sizes, captions, strict=True):
            self.ops.append(("image", x, top - h, w, h, f.png, f.width_px))
            y = top - img_h - 2
            for line in cap:
                y -= 7 * 1.3
                self.text(x, y + 2, line, 7, colour=MUTED)
            x += width + gap
        self.y = top - img_h - cap_h - 10


def _decode(png: bytes, width_pt: float) -> np.ndarray:
    img = cv2.imdecode(np.frombuffer(png, np.uint8), cv2.IMREAD_COLOR)
    img = cv2.cvtColor(img, cv2.COLOR_BGR2RGB)
    target = int(round(width_pt / 72.0 * IMAGE_DPI))
    if img.shape[1] > target * 1.15:
        h = max(1, round(img.shape[0] * target / img.shape[1]))
        img = cv2.resize(img, (target, h), interpolation=cv2.INTER_AREA)
    return img


def _title_block(flow: _Flow, c: ReportContent) -> None:
    m = flow.m
    y = TOP + 6
    flow.text(MARGIN, y - 8, c.title.upper(), 7.5, colour=MUTED)
    sample = c.sample if m.width(c.sample, 17, "bold") < CONTENT_W - 190 else c.sample[:40] + "…"
    flow.text(MARGIN, y - 29, sample, 17, weight="bold", colour=ACCENT)
    spec = f"Spec {c.spec_text}" if c.spec_text else "No spec given"
    flow.text(MARGIN, y - 44, f"{spec} · generated {c.generated} · {c.software}", 7.5, colour=MUTED)
    # verdict box
    bw, bh = 175.0, 52.0
    bx = MARGIN + CONTENT_W - bw
    flow.rect(bx, y - bh - 2, bw, bh, VERDICT_COLOURS.get(c.verdict, "#5f6368"))
    flow.text(bx + 10, y - 22, c.verdict.upper(), 15, weight="bold", colour="white")
    for k, line in enumerate(m.wrap(c.verdict_reason, bw - 20, 6.5)[:3]):
        flow.text(bx + 10, y - 33 - 7.5 * k, line, 6.5, colour="white")
    flow.y = y - bh - 8
    flow.rect(MARGIN, flow.y, CONTENT_W, 2.5, ACCENT)
    flow.y -= 12


def _key_figures(flow: _Flow, c: ReportContent) -> None:
    per_row = 4
    gap = 8.0
    w = (CONTENT_W - gap * (per_row - 1)) / per_row
    h = 44.0
    for start in range(0, len(c.key_figures), per_row):
        flow.need(h + gap)
        top = flow.y
        for j, k in enumerate(c.key_figures[start : start + per_row]):
            x = MARGIN + j * (w + gap)
            flow.rect(x, top - h, w, h, SOFT, LINE, 0.6)
            flow.text(x + 7, top - 11, k.label.upper(), 6.3, colour=MUTED)
            flow.text(x + 7, top - 26, k.value, 11.5, weight="bold")
            detail = flow.m.wrap(k.detail, w - 12, 6.3)[0]
            flow.text(x + 7, top - 37, detail, 6.3, colour=MUTED)
        flow.y = top - h - gap
    flow.y -= 4


def _layout(content: ReportContent) -> list[_Page]:
    flow = _Flow(_Metrics())
    _title_block(flow, content)
    flow.boxed(content.caution, label="Caution.", face="#fff8e6", edge="#d49a00", colour="#7a5200")
    if content.problem:
        flow.boxed(
            content.problem, label="Problem.", face="#fdecea", edge="#b3261e", colour="#7d1a14"
        )
    if content.warnings:
        text = "\n".join(f"\u2022 {w}" for w in content.warnings)
        flow.boxed(
            "\n" + text,
            label="Warnings and notes.",
            face="#fffdf5",
            edge="#d49a00",
            colour="#7a5200",
        )
    else:
        flow.boxed("none.", label="Warnings:", face="#f3faf4", edge="#1e7b34", colour="#24522f")
    _key_figures(flow, content)
    for number, section in enumerate(content.sections, start=1):
        # keep the heading with its leading paragraphs and first table or figure
        first = 0
        while first < len(section.blocks) and isinstance(section.blocks[first], Paragraph):
            first += 1
        flow.heading(section.title, number, keep=flow.height_of(section.blocks[: first + 1]))
        for block in section.blocks:
            flow.place(block)
    return flow.pages


def _draw_page(page: _Page, number: int, total: int, content: ReportContent):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    fig = Figure(figsize=(PAGE_W / 72.0, PAGE_H / 72.0), dpi=72, facecolor="white")
    FigureCanvasAgg(fig)

    def fx(x):
        return x / PAGE_W

    def fy(y):
        return y / PAGE_H

    head_y = PAGE_H - 30
    fig.text(
        fx(MARGIN),
        fy(head_y),
        f"{content.title} · {content.sample}",
        fontsize=7,
        color=MUTED,
        parse_math=False,
    )
    fig.text(
        fx(PAGE_W - MARGIN),
        fy(head_y),
        f"page {number} of {total}",
        fontsize=7,
        color=MUTED,
        ha="right",
        parse_math=False,
    )
    fig.add_artist(
        Rectangle(
            (fx(MARGIN), fy(head_y - 6)),
            fx(CONTENT_W),
            fy(0.5),
            transform=fig.transFigure,
            facecolor=LINE,
            edgecolor="none",
        )
    )
    fig.text(
        fx(MARGIN),
        fy(24),
        f"{content.software} · optical estimate, not a certified "
        "measurement: verify with a calibrated instrument",
        fontsize=6.5,
        color=MUTED,
        parse_math=False,
    )
    for op in page.ops:
        kind = op[0]
        if kind == "text":
            _, x, y, s, size, weight, colour, ha, family = op
            fig.text(
                fx(x),
                fy(y),
                s,
                fontsize=size,
                fontweight=weight,
                color=colour,
                ha=ha,
                va="baseline",
                family=family,
                parse_math=False,
            )
        elif kind == "rect":
            _, x, y, w, h, face, edge, lw = op
            fig.add_artist(
                Rectangle(
                    (fx(x), fy(y)),
                    fx(w),
                    fy(h),
                    transform=fig.transFigure,
                    facecolor=face,
                    edgecolor=edge,
                    linewidth=lw,
                )
            )
        elif kind == "line":
            _, x0, x1, y, colour, lw = op
            fig.add_artist(
                Rectangle(
                    (fx(x0), fy(y)),
                    fx(x1 - x0),
                    fy(lw),
                    transform=fig.transFigure,
                    facecolor=colour,
                    edgecolor="none",
                )
            )
        elif kind == "image":
            _, x, y, w, h, png, _ = op
            ax = fig.add_axes((fx(x), fy(y), fx(w), fy(h)))
            ax.imshow(_decode(png, w), interpolation="none", aspect="auto")
            ax.set_axis_off()
    return fig


def render_pdf(content: ReportContent, path: str | os.PathLike[str]) -> None:
    """Write the report as an A4 PDF to ``path`` (a temporary path of ``atomic_path``)."""
    from matplotlib.backends.backend_pdf import PdfPages

    pages = _layout(content)
    meta = {
        "Title": f"{content.title}: {content.sample}",
        "Creator": content.software,
        "Subject": "film thickness estimated from interference colours",
    }
    with PdfPages(os.fspath(path), metadata=meta) as pdf:
        for i, page in enumerate(pages, start=1):
            pdf.savefig(_draw_page(page, i, len(pages), content), facecolor="white")
