"""HTML rendering: one self-contained page, parsed with the standard library parser."""

from __future__ import annotations

import re

import base64
from html.parser import HTMLParser

from speciakin.report import Paragraph, ReportDocument, Section
from speciakin.report.document import PNG_SIGNATURE
from speciakin.report.html import html_text



class Collector(HTMLParser):
    """Gathers tags, attributes, ids and text (html.parser from the Python standard library)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.ids: set[str] = set()
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        self.tags.append((tag, attributes))
        if "id" in attributes:
            self.ids.add(attributes["id"])

    def handle_data(self, data):
        self.text.append(data)


def parse(text: str) -> Collector:
    parser = Collector()
    parser.feed(text)
    parser.close()
    return parser


def test_page_is_self_contained(rendered):
    text = rendered["html"].read_text(encoding="utf-8")
    page = parse(text)
    images = [a for tag, a in page.tags if tag == "img"]
    assert len(images) == 3
    for attributes in images:
        src = attributes["src"]
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1]).startswith(PNG_SIGNATURE)
        assert attributes["alt"]
    for tag, attributes in page.tags:
        assert tag not in ("script", "link", "iframe", "object"), tag
        for name in ("src", "href"):
            value = attributes.get(name)
            if value is not None and name == "href":
                assert value.startswith("#"), value
    assert "http://" not in text and "https://" not in text
    assert "@media print" in text


def test_contents_links_resolve_and_decision_comes_first(rendered, document, decision_text):
    text = rendered["html"].read_text(encoding="utf-8")
    page = parse(text)
    links = [a["href"][1:] for tag, a in page.tags if tag == "a"]
    assert set(links) <= page.ids
    assert {s.anchor for s in document.sections} <= set(links)
    body = " ".join(" ".join(page.text).split())
    assert body.index(decision_text) < body.index("1. Decision") < body.index("5. Cautions")
    assert body.index("Contents") < body.index("1. Decision")
    # the contents list the numbered sections once each, in order (the list's numbers are the headings')
    nav = text[text.index('<nav class="contents"'):text.index("</nav>")]
    assert re.findall(r'href="#([^"]+)"', nav) == [s.anchor for s in document.sections]


def test_numbers_are_formatted_per_column(rendered):
    body = " ".join(parse(rendered["html"].read_text(encoding="utf-8")).text)
    assert "2.3514" in body and "0.0412" in body and "10.0500" in body
    assert "observed [mol%]" in body


def test_text_is_escaped():
    doc = ReportDocument("A <b>bold</b> title", [Section("S & T", [Paragraph("<script>alert(1)</script>")])])
    text = html_text(doc)
    assert "<script>alert" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "A &lt;b&gt;bold&lt;/b&gt; title" in text
    assert "This report states no decision." in text


def test_the_recorded_command_has_a_short_label_and_its_note_beside_it():
    # the header's labels float in a column 11rem wide: a long label ran over the decision box below it
    doc = ReportDocument("T", [Section("S", [Paragraph("x")])], command="speciakin run ../..")
    page = html_text(doc)
    assert "<dt>Reproduce with</dt><dd><code>speciakin run ../..</code> (paths from the folder of this report)</dd>" \
        in page
    labels = re.findall(r"<dt>([^<]*)</dt>", page)
    assert labels and max(len(t) for t in labels) <= 16, labels
