"""PDF rendering with reportlab platypus: A4, title block with the decision
summary, contents, numbered pages, tables that split across pages (header
row repeated), figures scaled to the text frame.

Text is set in DejaVu Sans (shipped with matplotlib) so that symbols such as
"≥", "±" and Greek letters print and stay extractable, with fallback fonts
for CJK names and emoji (pdf_fonts.py); the built-in Helvetica is used when
DejaVu Sans is missing.
"""

from __future__ import annotations

import io
import os
from pathlib import Path

from speciakin.errors import InputError, Location
from speciakin.palette import OKABE_ITO
from speciakin.report._io import atomic_write_bytes
from speciakin.report.document import (CALLOUT_KINDS, REPRODUCE_LABEL, REPRODUCE_NOTE, RESERVED_ANCHORS, Block, Callout,
                                       Figure, KeyValues, ReportDocument, Table)
from speciakin.report.html import SUMMARY_ANCHOR, SUMMARY_TITLE
from speciakin.report.pdf_fonts import markup as escape  # escapes; fallback fonts for any script
from speciakin.report.pdf_fonts import register_fonts

__all__ = ["render_pdf", "pdf_bytes", "CALLOUT_COLORS"]

#: Border colour of each callout kind (:mod:`speciakin.palette`).
CALLOUT_COLORS = {"decision": OKABE_ITO["blue"], "warning": OKABE_ITO["vermillion"],
                  "caution": OKABE_ITO["orange"], "note": "#6B6B6B"}
_BAND = "#F3F5F7"
_RULE = "#C8C8C8"


def _fonts() -> tuple[str, str, str]:
    """Register DejaVu Sans and the fallback fonts (pdf_fonts.py); return (regular, bold, mono) font names."""
    return register_fonts()


def _styles():
    from reportlab.lib.colors import HexColor
    from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet

    regular, bold, mono = _fonts()
    base = getSampleStyleSheet()
    body = ParagraphStyle("SpkBody", parent=base["BodyText"], fontName=regular, fontSize=9.5, leading=13,
                          spaceAfter=5)
    return {
        "body": body,
        "title": ParagraphStyle("SpkTitle", parent=body, fontName=bold, fontSize=20, leading=24, spaceAfter=6),
        "subtitle": ParagraphStyle("SpkSubtitle", parent=body, fontSize=12.5, leading=16,
                                   textColor=HexColor("#5A5A5A"), spaceAfter=10),
        "h2": ParagraphStyle("SpkH2", parent=body, fontName=bold, fontSize=14, leading=18, spaceBefore=14,
                             spaceAfter=6, keepWithNext=True),
        "caption": ParagraphStyle("SpkCaption", parent=body, fontSize=8.5, leading=11,
                                  textColor=HexColor("#5A5A5A"), spaceAfter=10),
        "table_title": ParagraphStyle("SpkTableTitle", parent=body, fontName=bold, spaceBefore=4,
                                      keepWithNext=True),
        "cell": ParagraphStyle("SpkCell", parent=body, fontSize=8.5, leading=10.5, spaceAfter=0),
        "cell_num": ParagraphStyle("SpkCellNum", parent=body, fontSize=8.5, leading=10.5, spaceAfter=0,
                                   alignment=2),
        "head": ParagraphStyle("SpkHead", parent=body, fontName=bold, fontSize=8.5, leading=10.5, spaceAfter=0),
        "meta": ParagraphStyle("SpkMeta", parent=body, fontSize=8.5, leading=11, textColor=HexColor("#5A5A5A"),
                               spaceAfter=1),
        "code": ParagraphStyle("SpkCode", parent=body, fontName=mono, fontSize=7.5, leading=9.5),
        "bold": bold,
        "regular": regular,
    }


def _p(text: str, style):
    from reportlab.platypus import Paragraph

    return Paragraph(escape(str(text)).replace("\n", "<br/>"), style)


def _callout(block: Callout, styles, width: float):
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Paragraph
    from reportlab.platypus import Table as RLTable
    from reportlab.platypus import TableStyle

    color = CALLOUT_COLORS[block.kind]
    head = Paragraph(f'<font color="{color}">{escape(CALLOUT_KINDS[block.kind].upper())}</font>'
                     f"&nbsp;&nbsp;<b>{escape(block.title)}</b>", styles["body"])
    cells = [[head]] + [[_p(para, styles["body"])] for para in block.text.split("\n\n") if para.strip()]
    table = RLTable(cells, colWidths=[width])
    table.setStyle(TableStyle([
        ("BACKGROUND", (0, 0), (-1, -1), HexColor(_BAND)),
        ("LINEBEFORE", (0, 0), (0, -1), 4, HexColor(color)),
        ("LEFTPADDING", (0, 0), (-1, -1), 9),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, -1), (-1, -1), 6),
        ("TOPPADDING", (0, 0), (-1, 0), 6),
    ]))
    table.spaceBefore, table.spaceAfter = 4, 8
    from reportlab.platypus import KeepTogether

    return KeepTogether([table])  # a callout's title never sits alone at the foot of a page


def _column_widths(table: Table, width: float, cell_font: str = "Helvetica", head_font: str = "Helvetica-Bold",
                   size: float = 8.5) -> list[float]:
    """Column widths [pt] from measured text widths.

    Each column wants its widest cell (or header) on one line; it needs at
    least its longest unbreakable token (a number, a word of the header), so
    numbers are never broken mid-digit.  Space beyond the minima is shared in
    proportion to what each column still wants; spare space is shared in
    proportion to the wanted widths.
    """
    from reportlab.pdfbase.pdfmetrics import stringWidth

    pad = 2 * 6 + 1  # reportlab default left/right cell padding [pt], plus a point of slack
    heads = table.headers()
    rows = table.formatted_rows()
    desired, minimum = [], []
    for i in range(len(table.columns)):
        cells = [row[i] for row in rows]
        body = max((stringWidth(c, cell_font, size) for c in cells), default=0.0)
        head = stringWidth(heads[i], head_font, size)
        tokens = max((stringWidth(t, cell_font, size) for c in cells for t in c.split()), default=0.0)
        head_word = max((stringWidth(t, head_font, size) for t in heads[i].split()), default=0.0)
        minimum.append(max(tokens, head_word, 12.0) + pad)
        desired.append(min(max(body, head) + pad, 0.6 * width))
    desired = [max(d, m) for d, m in zip(desired, minimum)]
    total_desired, total_min = sum(desired), sum(minimum)
    if total_desired <= width:
        return [width * d / total_desired for d in desired]
    if total_min <= width:
        share = (width - total_min) / (total_desired - total_min)
        return [m + (d - m) * share for d, m in zip(desired, minimum)]
    # the unbreakable tokens do not fit side by side (a SHA-256 beside a path): the widest columns give
    # way first, each down to half its minimum (their long token wraps), so that a short word such as a
    # file's role stays whole
    widths, excess = list(minimum), total_min - width
    for i in sorted(range(len(widths)), key=lambda k: -minimum[k]):
        take = min(excess, 0.5 * widths[i])
        widths[i] -= take
        excess -= take
        if excess <= 0.0:
            return widths
    return [width * w / sum(widths) for w in widths]


def _table(block: Table, styles, width: float) -> list:
    from reportlab.lib.colors import HexColor
    from reportlab.pdfbase.pdfmetrics import stringWidth
    from reportlab.platypus import Table as RLTable
    from reportlab.platypus import TableStyle

    widths = _column_widths(block, width, styles["cell"].fontName, styles["head"].fontName,
                            styles["cell"].fontSize)
    numeric_columns = [bool(cells) and all(isinstance(c, (int, float)) for c in cells)
                       for cells in ([row[i] for row in block.rows if row[i] is not None]
                                     for i in range(len(block.columns)))]
    cell_style = styles["cell"]
    padding = 2 * 6 + 1  # reportlab default left/right cell padding [pt], plus a point of slack
    body = []
    for row in block.formatted_rows():
        out = []
        for i, text in enumerate(row):
            # short text as a plain string (fast); long text as a wrapping paragraph
            if stringWidth(text, cell_style.fontName, cell_style.fontSize) <= widths[i] - padding:
                out.append(text)
            else:
                out.append(_p(text, styles["cell_num"] if numeric_columns[i] else cell_style))
        body.append(out)
    data = [[_p(h, styles["head"]) for h in block.headers()]] + body
    table = RLTable(data, colWidths=widths, repeatRows=1, hAlign="LEFT")
    commands = [
        ("FONT", (0, 1), (-1, -1), cell_style.fontName, cell_style.fontSize, cell_style.leading),
        ("BACKGROUND", (0, 0), (-1, 0), HexColor(_BAND)),
        ("LINEBELOW", (0, 0), (-1, 0), 1.0, HexColor("#1A1A1A")),
        ("LINEBELOW", (0, 1), (-1, -1), 0.4, HexColor(_RULE)),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
    ]
    commands += [("ALIGN", (i, 1), (i, -1), "RIGHT") for i, numeric in enumerate(numeric_columns) if numeric]
    table.setStyle(TableStyle(commands))
    out = [_p(block.title, styles["table_title"]), table]
    if block.note:
        out.append(_p(block.note, styles["caption"]))
    else:
        table.spaceAfter = 10
    return out


def _key_values(block: KeyValues, styles, width: float):
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Table as RLTable
    from reportlab.platypus import TableStyle

    rows = [[_p(k, styles["head"]), _p(v, styles["cell"])] for k, v in block.formatted()]
    table = RLTable(rows, colWidths=[width * 0.38, width * 0.62], hAlign="LEFT")
    table.setStyle(TableStyle([("LINEBELOW", (0, 0), (-1, -1), 0.4, HexColor(_RULE)),
                               ("VALIGN", (0, 0), (-1, -1), "TOP")]))
    table.spaceAfter = 8
    return table


def _empty_box(width: float, height: float):
    """A flowable that takes ``width`` x ``height`` [pt] on the page and draws nothing."""
    from reportlab.platypus import Flowable

    box = Flowable()
    box.width, box.height = width, height
    box.wrap = lambda available_width, available_height: (width, height)
    box.draw = lambda: None
    return box


def _figure(block: Figure, styles, width: float, height: float, placeholder: bool = False):
    """The figure scaled to the frame, with its caption; ``placeholder``: an empty box of the
    image's size instead of the image (the page-counting pass lays out the same pages without
    encoding any image)."""
    from reportlab.lib.utils import ImageReader
    from reportlab.platypus import Image, KeepTogether

    data = block.image_bytes()
    try:
        pixel_width, pixel_height = ImageReader(io.BytesIO(data)).getSize()
    except (OSError, ValueError):
        raise InputError("figure image cannot be decoded", Location(key=f"figure '{block.caption}'"),
                         None, "a valid PNG image") from None
    draw_width = width * block.width_fraction
    draw_height = draw_width * pixel_height / pixel_width
    if draw_height > height * 0.8:
        draw_height = height * 0.8
        draw_width = draw_height * pixel_width / pixel_height
    if placeholder:
        image = _empty_box(draw_width, draw_height)
    else:
        image = Image(io.BytesIO(data), width=draw_width, height=draw_height)
    parts = [image]
    if block.caption:
        parts.append(_p(block.caption, styles["caption"]))
    return KeepTogether(parts)


def _block(block: Block, styles, width: float, height: float, placeholder: bool = False) -> list:
    from reportlab.platypus import ListFlowable, ListItem

    kind = block.block_kind
    if kind == "paragraph":
        return [_p(block.text, styles["body"])]
    if kind == "key_values":
        return [_key_values(block, styles, width)]
    if kind == "table":
        return _table(block, styles, width)
    if kind == "figure":
        return [_figure(block, styles, width, height, placeholder)]
    if kind == "callout":
        return [_callout(block, styles, width)]
    if kind == "bullets":
        return [ListFlowable([ListItem(_p(t, styles["body"]), leftIndent=12) for t in block.items],
                             bulletType="bullet", start="\u2022", leftIndent=12, bulletFontName=styles["regular"])]
    raise TypeError(f"no PDF rendering for block {kind!r}")


def _footer(title: str, font: str, total: int | None):
    """onPage callback drawing the title and "page i of n" in the footer."""
    from reportlab.lib.colors import HexColor
    from reportlab.lib.units import mm

    def draw(canvas, template) -> None:
        canvas.saveState()
        canvas.setFont(font, 8)
        canvas.setFillColor(HexColor("#5A5A5A"))
        canvas.drawString(template.leftMargin, 12 * mm, title[:90])
        page = canvas.getPageNumber()
        label = f"page {page} of {total}" if total else f"page {page}"
        canvas.drawRightString(template.pagesize[0] - template.rightMargin, 12 * mm, label)
        canvas.restoreState()

    return draw


def pdf_bytes(doc: ReportDocument) -> bytes:
    """The complete PDF of ``doc`` as bytes.

    The document is laid out twice: the first pass counts the pages so that
    the second can print "page i of n" in every footer.  The first pass lays
    out empty boxes of each figure's size (the same pages, no image encoded);
    the second writes the images as binary Flate streams (not ASCII85 text,
    whose pure-Python encoder took most of the rendering time).
    """
    from reportlab import rl_config

    _, total = _build(doc, None, placeholders=True)
    saved = rl_config.useA85
    rl_config.useA85 = 0
    try:
        data, _ = _build(doc, total)
    finally:
        rl_config.useA85 = saved
    return data


def _build(doc: ReportDocument, total: int | None, placeholders: bool = False) -> tuple[bytes, int]:
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, SimpleDocTemplate

    styles = _styles()
    buffer = io.BytesIO()

    class _Template(SimpleDocTemplate):
        def afterFlowable(self, flowable):  # noqa: N802 (reportlab API)
            key = getattr(flowable, "_speciakin_anchor", None)
            if key:
                self.canv.bookmarkPage(key)
                self.canv.addOutlineEntry(flowable.getPlainText(), key, level=0)

    template = _Template(buffer, pagesize=A4, leftMargin=25 * mm, rightMargin=25 * mm, topMargin=20 * mm,
                         bottomMargin=22 * mm, title=doc.title, subject=doc.subtitle,
                         creator=f"speciakin {doc.software_version}", author="speciakin")
    width, height = template.width, template.height

    def heading(text: str, anchor: str):
        para = Paragraph(f'<a name="{anchor}"/>{escape(text)}', styles["h2"])
        para._speciakin_anchor = anchor
        return para

    story: list = [_p(doc.title, styles["title"])]
    if doc.subtitle:
        story.append(_p(doc.subtitle, styles["subtitle"]))
    story.append(_p(f"Created {doc.created} \u00b7 speciakin {doc.software_version}", styles["meta"]))
    if doc.command:
        story += [_p(f"{REPRODUCE_LABEL} ({REPRODUCE_NOTE}):", styles["meta"]), _p(doc.command, styles["code"])]
    story.append(heading(SUMMARY_TITLE, SUMMARY_ANCHOR))
    decisions = doc.callouts("decision")
    for block in decisions:
        story.append(_callout(block, styles, width))
    if not decisions:
        story.append(_p("This report states no decision.", styles["body"]))
    for block in doc.alerts():
        story.append(_callout(block, styles, width))
    story.append(heading("Contents", RESERVED_ANCHORS[1]))
    for i, section in enumerate(doc.sections, 1):
        story.append(Paragraph(f'<a href="#{section.anchor}" color="{OKABE_ITO["blue"]}">{i}. {escape(section.title)}</a>',
                               styles["body"]))
    for i, section in enumerate(doc.sections, 1):
        story.append(heading(f"{i}. {section.title}", section.anchor))
        for block in section.blocks:
            if getattr(block, "kind", None) == "decision":
                continue  # decision callouts are shown once, in the summary on page 1
            story.extend(_block(block, styles, width, height, placeholders))
    footer = _footer(doc.title, styles["regular"], total)
    template.build(story, onFirstPage=footer, onLaterPages=footer)
    return buffer.getvalue(), template.page


def render_pdf(doc: ReportDocument, path: str | os.PathLike) -> Path:
    """Write ``doc`` as an A4 PDF at ``path`` (atomically); returns the path."""
    return atomic_write_bytes(path, pdf_bytes(doc))
