"""Word rendering with python-docx: real headings, styled tables, charts as PNG pictures.

The machine-readable stamp goes into the core document properties (identifier = fingerprint,
comments = the stamp JSON, content status = draft/final) and is also printed in the last section.
"""

from __future__ import annotations

import copy
import io
import json
import re

from vetting.memo import charts
from vetting.memo.document import (
    BulletList,
    Callout,
    Document,
    Facts,
    Figure,
    Paragraph,
    Section,
    Table,
)

TABLE_STYLE = "Light Grid Accent 1"
_CALLOUT_FILL = {"decision": "E8F4EC", "warning": "FBEDE6", "note": "EAF1F8"}
_CALLOUT_EDGE = {"decision": "2F8F5B", "warning": "B5542D", "note": "1C5D99"}

# characters XML 1.0 cannot hold: python-docx would refuse them
_BAD_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _t(text: str) -> str:
    return _BAD_XML.sub("\ufffd", str(text))


def _shade(cell, fill: str, edge: str | None = None) -> None:
    from docx.oxml import parse_xml
    from docx.oxml.ns import nsdecls

    tc_pr = cell._tc.get_or_add_tcPr()
    tc_pr.append(parse_xml(f'<w:shd {nsdecls("w")} w:val="clear" w:color="auto" w:fill="{fill}"/>'))
    if edge:
        tc_pr.append(
            parse_xml(
                f'<w:tcBorders {nsdecls("w")}><w:left w:val="single" w:sz="36" w:space="0" w:color="{edge}"/>'
                '<w:top w:val="nil"/><w:bottom w:val="nil"/><w:right w:val="nil"/></w:tcBorders>'
            )
        )


def _keep_row_together(row) -> None:
    from docx.oxml import parse_xml
    from docx.oxml.ns import nsdecls

    row._tr.get_or_add_trPr().append(parse_xml(f'<w:cantSplit {nsdecls("w")}/>'))


def _repeat_header(row) -> None:
    from docx.oxml import parse_xml
    from docx.oxml.ns import nsdecls

    row._tr.get_or_add_trPr().append(parse_xml(f'<w:tblHeader {nsdecls("w")}/>'))


class _State:
    """What one rendering keeps between blocks. `reference` renders through python-docx's own
    public calls only (slow at thousands of rows); the default path writes the same XML with
    the shortcuts below, and tests/memo/test_equivalence.py checks the two byte for byte."""

    def __init__(self, reference: bool) -> None:
        self.reference = reference
        self.paragraphs: dict = {}  # style name -> an empty paragraph of that style, to copy
        self.table_style_id: str | None = None
        self.block_width = None  # the text width, as python-docx's Document.add_table uses it
        self.next_shape_id: int | None = None  # the next drawing id, as StoryPart.next_id gives it
        self.sectPr = None  # the body's section properties, always its last child
        self.spliced: list[str] = []  # XML text of rows and paragraphs written as text (_Splice)
        self.pictures: list = []  # (run, chart) of each picture still to place (_place_pictures)


def _state(doc) -> _State:
    return doc.__dict__["_vetting_state"]


def _cells(doc, row, table):
    """row.cells for the rows we make (no merged or spanned cells). python-docx walks the cells
    with a recursive nested function, a reference cycle that holds the row and through it the
    whole XML tree until the cyclic collector finds it; the memo drops everything before the
    collector runs again, so the fast path builds the same cell objects directly."""
    from docx.table import _Cell

    if _state(doc).reference:
        return row.cells
    return tuple(_Cell(tc, table) for tc in row._tr.tc_lst)


_SPLICE = "vetting-splice-"
_SPLICE_RE = re.compile(rb"<!--vetting-splice-(\d+)-->")
_MARK = re.compile("<w:t>\ue000(\\d+)\ue001</w:t>")


#: A character _t() replaces, a tab or line break, an XML markup character, or white space
#: other than the plain space (str.isspace(): whether str.strip() removes it).
_ROW_SPECIAL = re.compile(
    "[\x01-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff\t\r\n&<>"
    "\x85\xa0\u1680\u2000-\u200a\u2028\u2029\u202f\u205f\u3000]"
)


def _plain_texts(joined: str) -> bool:
    """Whether texts joined by NUL need none of _Splice.add's care: no character _ROW_SPECIAL
    finds and no plain space at the start or end of any text."""
    return (
        _ROW_SPECIAL.search(joined) is None
        and joined[:1] != " "
        and joined[-1:] != " "
        and " \x00" not in joined
        and "\x00 " not in joined
    )


def _xml_text(value: str) -> str:
    """Character data as XML text (what lxml writes back for it once parsed)."""
    if "&" in value:
        value = value.replace("&", "&amp;")
    if "<" in value:
        value = value.replace("<", "&lt;")
    if ">" in value:
        value = value.replace(">", "&gt;")
    return value


class _Splice:
    """Rows or paragraphs that are copies of a prototype element with their own run texts,
    written as XML text instead of as elements: a comment marks their place in the tree and
    the serialized document part gets the text there (render() below). The same XML as copying
    the prototype and setting each run's text (`_set_run_text`) would serialize to, without
    building, and then serializing, tens of thousands of elements at 10,000 instruments.

    The prototype's runs must each be `[w:rPr] w:t` (one run per value, in document order).
    Texts holding tabs or line breaks (python-docx writes w:tab/w:br for them) are not taken:
    `add` returns False and the caller places that one the slow way."""

    def __init__(self, doc, proto, parent, before=None) -> None:
        self.state = _state(doc)
        self.parent, self.before = parent, before
        self.chunk: list[str] = []
        mark = copy.copy(proto)
        runs = list(mark.iter(_R))
        for i, r in enumerate(runs):
            _set_run_text(r, f"\ue000{i}\ue001")
        from lxml import etree

        text = etree.tostring(mark, encoding="unicode")
        # the copy stands alone, so its root declares the namespaces it uses; in the document
        # they are declared on the root element, and the rows or paragraphs carry none
        end = text.index(">")
        head = re.sub(r' xmlns(:\w+)?="[^"]*"', "", text[:end])
        text = head + text[end:]
        parts = _MARK.split(text)
        self.ok = parts[1::2] == [str(i) for i in range(len(runs))] and "\ue000" not in "".join(parts[0::2])
        self.pieces = parts[0::2]
        self.n = len(runs)
        # the usual row (every text non-empty, none with markup characters, line breaks or
        # leading/trailing space) is one str.format of this
        self.template = "<w:t>{}</w:t>".join(p.replace("{", "{{").replace("}", "}}") for p in self.pieces)

    def add(self, values) -> bool:
        """Add a row (or paragraph) of texts as given to python-docx, before _t()."""
        if not self.ok or len(values) != self.n:
            return False
        try:
            joined = "\x00".join(values)
        except TypeError:  # not all text: each value through _t() below
            joined = None
        if joined is not None and all(values) and _plain_texts(joined) and joined.count("\x00") == self.n - 1:
            self.chunk.append(self.template.format(*values))
            return True
        out = []
        pieces = self.pieces
        for piece, value in zip(pieces, values):
            out.append(piece)
            value = _t(value)
            if not value:
                continue  # an empty run: no w:t, as python-docx writes it
            if not _BREAKS.isdisjoint(value):
                return False
            # python-docx: xml:space="preserve" exactly when the text has leading or trailing space
            out.append('<w:t xml:space="preserve">' if len(value.strip()) < len(value) else "<w:t>")
            out.append(_xml_text(value))
            out.append("</w:t>")
        out.append(pieces[-1])
        self.chunk.append("".join(out))
        return True

    def flush(self) -> None:
        """Mark the place of the texts added so far (call before placing an element the slow way)."""
        if not self.chunk:
            return
        from lxml import etree

        spliced = self.state.spliced
        mark = etree.Comment(f"{_SPLICE}{len(spliced)}")
        spliced.append("".join(self.chunk))
        self.chunk = []
        if self.before is not None:
            self.before.addprevious(mark)
        else:
            self.parent.append(mark)


def _save(doc, buf) -> None:
    """doc.save(buf), with the spliced texts put in place of their marks in the document part."""
    from docx.opc.oxml import serialize_part_xml
    from docx.opc.pkgwriter import PackageWriter

    spliced = _state(doc).spliced
    if not spliced:
        doc.save(buf)
        return
    package = doc.part.package
    parts = package.parts
    for part in parts:
        part.before_marshal()  # as OpcPackage.save
    xml = serialize_part_xml(doc.part.element)
    pieces = _SPLICE_RE.split(xml)
    blob = b"".join(p if i % 2 == 0 else spliced[int(p)].encode("utf-8") for i, p in enumerate(pieces))
    PackageWriter.write(buf, package.rels, [_PartWithBlob(p, blob) if p is doc.part else p for p in parts])


class _PartWithBlob:
    """A package part with its serialized bytes given (everything else is the part's own)."""

    def __init__(self, part, blob: bytes) -> None:
        self._part, self.blob = part, blob

    def __getattr__(self, name):
        return getattr(self._part, name)


def _para(doc, text: str, style: str):
    """doc.add_paragraph(text, style=style), writing the same XML faster: python-docx looks the
    style up (searching every style for the default one) and finds the paragraph's place anew
    for each paragraph, which at thousands of paragraphs was a large share of the Word memo's
    time. Here the style is looked up once per document and each paragraph is a copy."""
    from docx.enum.style import WD_STYLE_TYPE
    from docx.text.paragraph import Paragraph as DocxParagraph

    st = _state(doc)
    if st.reference:
        return doc.add_paragraph(text, style=style)
    # an empty styled paragraph per style, copied for each new one (python-docx would otherwise
    # search the body's children for where to put every paragraph and build its properties
    # anew), and one with a run of text, copied for each paragraph of plain text
    protos = st.paragraphs
    plain = bool(text) and _BREAKS.isdisjoint(text)
    proto = protos.get((style, plain))
    if proto is None and style not in protos:
        p = doc.add_paragraph()
        style_id = doc.part.get_style_id(style, WD_STYLE_TYPE.PARAGRAPH)
        if style_id is not None:
            p._p.style = style_id
        protos[style] = copy.copy(p._p)  # lxml: a copy of the whole element
    else:
        p_el = copy.copy(proto if proto is not None else protos[style])
        if st.sectPr is not None:
            st.sectPr.addprevious(p_el)  # python-docx: before the body's sectPr (its last child)
        else:
            doc.element.body.append(p_el)
        p = DocxParagraph(p_el, doc._body)
        if proto is not None:
            _set_run_text(p_el[-1], text)  # the copy's own run
            return p
    if text:
        _set_run_text(p._p.add_r(), text)  # p.add_run(text), the same XML
        if plain:
            protos[(style, True)] = copy.copy(p._p)
    return p


def _paragraphs(doc, texts: list[str], style: str) -> None:
    """_para(doc, _t(text), style) for each text; after the first plain one, plain texts are
    written as XML text (_Splice), copies of that paragraph."""
    st = _state(doc)
    splice = None
    for text in texts:
        if splice is not None and text and splice.add((text,)):
            continue
        if splice is not None:
            splice.flush()
        _para(doc, _t(text), style)
        if splice is None and not st.reference:
            proto = st.paragraphs.get((style, True))
            if proto is not None and sum(1 for _ in proto.iter(_R)) == 1:
                splice = _Splice(doc, proto, doc.element.body, before=st.sectPr)
    if splice is not None:
        splice.flush()


def _new_table(doc, rows: int, cols: int):
    """doc.add_table(rows, cols): python-docx finds the text width anew from the last section
    for every table (an XPath search over the whole body); here it is found once."""
    st = _state(doc)
    if st.reference:
        return doc.add_table(rows=rows, cols=cols)
    return doc._body.add_table(rows, cols, st.block_width)  # style None: no w:tblStyle, as there


def _style_table(doc, t) -> None:
    """t.style = doc.styles[TABLE_STYLE], with the style looked up once per document."""
    from docx.enum.style import WD_STYLE_TYPE

    st = _state(doc)
    if st.reference:
        t.style = doc.styles[TABLE_STYLE]
        return
    if st.table_style_id is None:
        st.table_style_id = doc.part.get_style_id(doc.styles[TABLE_STYLE], WD_STYLE_TYPE.TABLE)
    t._tbl.tblStyle_val = st.table_style_id


def _place_pictures(doc) -> None:
    """Put each chart's picture into the run kept for it, in document order, as
    doc.add_picture(stream, width=Inches(6.2)) puts it in place: nothing between the first
    picture and the end of the body adds a relationship to the document part or a drawing, so
    the image parts, their relationship ids and the drawing ids are those that adding them in
    place gives (tests/memo compares the parts with python-docx's own add_picture). python-docx
    finds the next drawing id by reading every id attribute of the whole document (XPath //@id)
    and the text width from the last section; here both are kept as the document is written
    (StoryPart.new_pic_inline, with the id counted here: no other element of ours has an id)."""
    from docx.oxml.shape import CT_Inline
    from docx.shared import Inches

    st = _state(doc)
    part = doc.part
    for run, chart in st.pictures:
        r_id, image = part.get_or_add_image(io.BytesIO(charts.to_png(chart)))
        cx, cy = image.scaled_dimensions(Inches(6.2), None)
        shape_id = st.next_shape_id
        st.next_shape_id += 1
        run._r.add_drawing(CT_Inline.new_pic_inline(shape_id, r_id, image.filename, cx, cy))
    st.pictures = []


_W = "{http://schemas.openxmlformats.org/wordprocessingml/2006/main}"
_RPR = _W + "rPr"
_R = _W + "r"
_T = _W + "t"
_XML_SPACE = "{http://www.w3.org/XML/1998/namespace}space"
_BREAKS = frozenset("\t\r\n")


def _set_run_text(r, text: str) -> None:
    """`r.text = text` for a `w:r` element, writing the same XML as python-docx's setter without
    its character-by-character walk (thousands of table cells made that walk, and the XPath
    queries around it, the largest part of the Word memo's time). Text holding tabs or line
    breaks, which python-docx turns into `w:tab`/`w:br` elements, takes python-docx's own path."""
    if not _BREAKS.isdisjoint(text):
        r.text = text
        return
    n = len(r)
    if text and n and (n == 1 or (n == 2 and r[0].tag == _RPR)):
        t = r[n - 1]
        if t.tag == _T:  # the usual case in a copied row or paragraph: [w:rPr] w:t
            t.text = text
            if len(text.strip()) < len(text):
                t.set(_XML_SPACE, "preserve")
            elif _XML_SPACE in t.attrib:
                del t.attrib[_XML_SPACE]
            return
    t = None
    for child in list(r):
        tag = child.tag
        if tag == _RPR or not isinstance(tag, str):
            continue
        if tag == _T and t is None and text:
            t = child  # reuse the first w:t; everything else but w:rPr goes
        else:
            r.remove(child)
    if not text:
        return
    if t is None:
        from docx.oxml.parser import OxmlElement

        t = OxmlElement("w:t")  # as python-docx makes it
        r.append(t)
    t.text = text
    # python-docx: xml:space="preserve" exactly when the text has leading or trailing space
    if len(text.strip()) < len(text):
        t.set(_XML_SPACE, "preserve")
    elif t.get(_XML_SPACE) is not None:
        del t.attrib[_XML_SPACE]


def _add_table(doc, table: Table) -> None:
    from docx.enum.text import WD_ALIGN_PARAGRAPH
    from docx.shared import Pt

    if table.caption:
        cap = _para(doc, _t(table.caption), "Caption")
        cap.paragraph_format.keep_with_next = True
    t = _new_table(doc, 1, len(table.columns))
    _style_table(doc, t)
    t.autofit = True
    # plain first column: this style would otherwise bold it like a header
    tbl_look = t._tbl.tblPr.find("{http://schemas.openxmlformats.org/wordprocessingml/2006/main}tblLook")
    if tbl_look is not None:
        tbl_look.set("{http://schemas.openxmlformats.org/wordprocessingml/2006/main}firstColumn", "0")
    wide = len(table.columns) >= 8
    font = Pt(7.5) if wide else Pt(8.5)
    widths = _column_widths(table, chars_per_cm=6.3 if wide else 5.6)
    no_space = Pt(0)

    def fill(row, values) -> None:
        # one pass per row: python-docx rebuilds the row's cell list on every `row.cells`
        _keep_row_together(row)
        for i, cell in enumerate(_cells(doc, row, t)):
            if i < len(values):
                cell.text = _t(values[i])
            cell.width = widths[i]
            for p in cell.paragraphs:
                if i in table.numeric:
                    p.alignment = WD_ALIGN_PARAGRAPH.RIGHT
                p.paragraph_format.space_after = no_space
                for run in p.runs:
                    run.font.size = font

    hdr = t.rows[0]
    _repeat_header(hdr)
    fill(hdr, table.columns)
    # the rows after the first full one are copies of it with their own text: the same XML as
    # filling each through python-docx, without rebuilding the formatting cell by cell (at a
    # thousand candidates that was most of the Word memo's time), written as XML text (_Splice)
    full = len(table.columns)
    proto = None
    splice = None
    tbl = t._tbl
    fast = not _state(doc).reference
    for values in table.rows:
        if splice is not None and splice.add(values):
            continue
        if proto is not None and len(values) == full:
            if splice is not None:
                splice.flush()
            tr = copy.copy(proto)  # lxml: a copy of the whole row
            # the copy's runs, one per cell in cell order (checked on the first full row)
            for r, value in zip(tr.iter(_R), values):
                _set_run_text(r, _t(value))
            tbl.append(tr)
            continue
        if splice is not None:
            splice.flush()
        row = t.add_row()
        fill(row, values)
        if fast and proto is None and len(values) == full and _one_run_per_cell(row._tr):
            proto = row._tr
            splice = _Splice(doc, proto, tbl)
    if splice is not None:
        splice.flush()
    t.autofit = False
    for i, width in enumerate(widths):
        t.columns[i].width = width
    doc.add_paragraph().paragraph_format.space_after = Pt(2)


def _one_run_per_cell(tr) -> bool:
    """Whether the row's runs, in document order, are exactly the first run of each cell's
    first paragraph (what `cell.text = ...` makes), so copies can be filled run by run."""
    firsts = [tc.p_lst[0].r_lst[0] if tc.p_lst and tc.p_lst[0].r_lst else None for tc in tr.tc_lst]
    return None not in firsts and list(tr.iter(_R)) == firsts


#: Text width of an A4 page with 2 cm margins.
TEXT_WIDTH_CM = 17.0


def _column_widths(table: Table, chars_per_cm: float = 5.6):
    """Share the text width among columns by how much text each holds. The longest word sets a
    floor (so numbers and words are not split), the longest cell sets the wish. When the floors
    alone do not fit, short columns (numbers, PASS/FAIL) keep theirs and the long-text columns,
    which can wrap between words, share what is left."""
    from docx.shared import Cm

    n = len(table.columns)
    floors, wishes, short = [], [], []
    for i, name in enumerate(table.columns):
        body = [str(row[i]) for row in table.rows if i < len(row)]
        cells = [str(name)] + body
        # the words of all cells at once (joined by a space, split on whitespace: the same words)
        longest_word = max(map(len, " ".join(cells).split()), default=1)
        longest_cell = max(map(len, cells), default=1)
        floors.append(min(max(longest_word, 3), 16) + 1)
        wishes.append(min(max(longest_cell, 4), 60) + 1)
        # short: the body holds only short items (numbers, PASS/FAIL), whatever the header says
        short.append(max(map(len, body), default=1) <= 9)
    # chars_per_cm: about 5.6 for 8.5 pt text, bold headers included
    padding_cm = 0.40  # the cell's left and right margins
    avail = (TEXT_WIDTH_CM - n * padding_cm) * chars_per_cm
    total_wish = sum(wishes)
    if total_wish <= avail:
        chars = [w * avail / total_wish for w in wishes]
    elif sum(floors) <= avail:
        extra = avail - sum(floors)
        spare = [max(w - f, 0) for w, f in zip(wishes, floors)]
        spare_total = sum(spare) or 1
        chars = [f + extra * sp / spare_total for f, sp in zip(floors, spare)]
    else:
        fixed = sum(f for f, sh in zip(floors, short) if sh)
        rest = max(avail - fixed, avail * 0.3)
        long_total = sum(f for f, sh in zip(floors, short) if not sh) or 1
        chars = [f if sh else f * rest / long_total for f, sh in zip(floors, short)]
        scale = avail / sum(chars)
        chars = [c * min(1.0, scale) for c in chars]
    return [Cm(c / chars_per_cm + padding_cm) for c in chars[:n]]


def _add_block(doc, block) -> None:
    from docx.shared import Inches, Pt, RGBColor

    if isinstance(block, Paragraph):
        p = doc.add_paragraph()
        run = p.add_run(_t(block.text))
        if block.style == "lead":
            run.bold = True
        elif block.style == "small":
            run.italic = True
            run.font.size = Pt(8.5)
            run.font.color.rgb = RGBColor(0x52, 0x60, 0x6D)
    elif isinstance(block, BulletList):
        _paragraphs(doc, block.items, "List Bullet")
    elif isinstance(block, Facts):
        t = _new_table(doc, 0, 2)
        fast = not _state(doc).reference
        proto = None  # the first row, with its widths: later rows are copies with their own text
        for i, (label, value) in enumerate(block.rows):
            if proto is not None:
                tr = copy.copy(proto)
                _, label_run, value_run = tr.iter(_R)
                _set_run_text(label_run, _t(label))
                _set_run_text(value_run, _t(value))
                t._tbl.append(tr)
                continue
            row = t.add_row()
            cells = _cells(doc, row, t)
            cells[0].text = ""
            cells[0].paragraphs[0].add_run(_t(label)).bold = True
            cells[1].text = _t(value)
            for c in cells:
                c.paragraphs[0].paragraph_format.space_after = Pt(0)
            # only the first row: rows made before a later prototype would miss their widths
            if fast and i == 0 and sum(1 for _ in row._tr.iter(_R)) == 3:  # empty run, label, value
                cells[0].width = Inches(2.2)
                cells[1].width = Inches(4.3)
                proto = row._tr
        t.columns[0].width = Inches(2.2)
        if proto is None:
            for row in t.rows:
                cells = _cells(doc, row, t)
                cells[0].width = Inches(2.2)
                cells[1].width = Inches(4.3)
        doc.add_paragraph().paragraph_format.space_after = Pt(2)
    elif isinstance(block, Table):
        _add_table(doc, block)
    elif isinstance(block, Callout):
        kind = block.kind if block.kind in _CALLOUT_FILL else "note"
        t = _new_table(doc, 1, 1)
        cell = _cells(doc, t.rows[0], t)[0]
        _keep_row_together(t.rows[0])
        _shade(cell, _CALLOUT_FILL[kind], _CALLOUT_EDGE[kind])
        cell.text = ""
        cell.paragraphs[0].add_run(_t(block.title)).bold = True
        for line in block.lines:
            cell.add_paragraph(_t(line))
        doc.add_paragraph().paragraph_format.space_after = Pt(2)
    elif isinstance(block, Figure):
        st = _state(doc)
        if st.reference:
            doc.add_picture(io.BytesIO(charts.to_png(block.chart)), width=Inches(6.2))
            doc.paragraphs[-1].paragraph_format.keep_with_next = True
        else:
            # the picture's paragraph and run now, the picture itself once the body is written
            # (_place_pictures), so a chart drawn by the helper process (charts.ChartHelper) is
            # waited for only then
            p = doc.add_paragraph()
            st.pictures.append((p.add_run(), block.chart))
            p.paragraph_format.keep_with_next = True
        _para(doc, _t(block.caption), "Caption")
    else:
        raise TypeError(f"unknown block {type(block).__name__}")


def _add_section(doc, section: Section, level: int) -> None:
    _para(doc, _t(section.title), f"Heading {min(level, 9)}")
    for block in section.blocks:
        _add_block(doc, block)
    for sub in section.subsections:
        _add_section(doc, sub, level + 1)


def _page_field(paragraph) -> None:
    from docx.oxml import parse_xml
    from docx.oxml.ns import nsdecls

    run = paragraph.add_run()
    run._r.append(parse_xml(f'<w:fldChar {nsdecls("w")} w:fldCharType="begin"/>'))
    run._r.append(parse_xml(f'<w:instrText {nsdecls("w")} xml:space="preserve"> PAGE </w:instrText>'))
    run._r.append(parse_xml(f'<w:fldChar {nsdecls("w")} w:fldCharType="end"/>'))


def render(doc_model: Document, *, reference: bool = False) -> bytes:
    """The Word file. `reference=True` builds it through python-docx's public calls only (the
    same bytes, much slower at scale; used by the tests to check the default path)."""
    import docx
    from docx.shared import Cm, Pt, RGBColor

    doc = docx.Document()
    st = doc.__dict__["_vetting_state"] = _State(reference)
    sec = doc.sections[0]
    sec.page_height, sec.page_width = Cm(29.7), Cm(21.0)  # A4
    sec.left_margin = sec.right_margin = Cm(2.0)
    sec.top_margin = sec.bottom_margin = Cm(1.8)

    normal = doc.styles["Normal"]
    normal.font.name = "Calibri"
    normal.font.size = Pt(10)
    normal.paragraph_format.space_after = Pt(4)
    for name, size in (("Heading 1", 15), ("Heading 2", 12.5), ("Heading 3", 11), ("Heading 4", 10)):
        style = doc.styles[name]
        style.font.size = Pt(size)
        style.font.color.rgb = RGBColor(0x1C, 0x5D, 0x99)
        style.paragraph_format.space_before = Pt(12 if name == "Heading 1" else 8)
        style.paragraph_format.keep_with_next = True

    st.block_width = doc._block_width
    st.next_shape_id = doc.part.next_id  # the body is still empty: a cheap search here
    st.sectPr = doc.element.body.sectPr

    doc.add_heading(_t(doc_model.title), level=0)
    doc.add_paragraph(_t(doc_model.subtitle), style="Subtitle")
    for section in doc_model.sections:
        _add_section(doc, section, 1)
    _place_pictures(doc)

    footer = sec.footer
    if not reference:
        # the footer of the first (only) section gets its own definition, exactly as reading
        # footer.paragraphs would make it, without python-docx first searching the whole body
        # for an earlier section to inherit from (XPath preceding::w:sectPr)
        footer.is_linked_to_previous = False
    footer = footer.paragraphs[0]
    fp = str(doc_model.stamp.get("fingerprint", ""))
    run = footer.add_run(_t(f"{doc_model.title} · {doc_model.status} · fingerprint {fp[:16]}… · page "))
    run.font.size = Pt(7.5)
    _page_field(footer)

    props = doc.core_properties
    props.title = _t(doc_model.title)[:255]
    props.subject = _t(doc_model.subtitle)[:255]
    props.author = _t(doc_model.author)[:255]
    props.last_modified_by = _t(doc_model.author)[:255]
    props.content_status = doc_model.status
    props.identifier = fp
    props.keywords = "vetting decision memo"
    props.comments = "Decision memo written by vetting; record stamp in the custom property " + STAMP_PROPERTY
    props.revision = 1
    _add_stamp_part(doc, json.dumps(doc_model.stamp, sort_keys=True, separators=(",", ":"), ensure_ascii=True))

    buf = io.BytesIO()
    if reference:
        doc.save(buf)
    else:
        _save(doc, buf)
    return buf.getvalue()


STAMP_PROPERTY = "vetting-memo-stamp"
_CUSTOM_PART = "/docProps/custom.xml"
_CUSTOM_CT = "application/vnd.openxmlformats-officedocument.custom-properties+xml"
_CUSTOM_RT = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/custom-properties"
_CUSTOM_NS = "http://schemas.openxmlformats.org/officeDocument/2006/custom-properties"
_VT_NS = "http://schemas.openxmlformats.org/officeDocument/2006/docPropsVTypes"


def _add_stamp_part(doc, stamp_json: str) -> None:
    """Store the stamp as a custom document property (docProps/custom.xml, ECMA-376 part 1,
    section 22.3): core properties are limited to 255 characters, custom ones are not."""
    from xml.sax.saxutils import escape as xml_escape

    from docx.opc.packuri import PackURI
    from docx.opc.part import Part

    xml = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<Properties xmlns="{_CUSTOM_NS}" xmlns:vt="{_VT_NS}">'
        '<property fmtid="{D5CDD505-2E9C-101B-9397-08002B2CF9AE}" pid="2" '
        f'name="{STAMP_PROPERTY}"><vt:lpwstr>{xml_escape(stamp_json)}</vt:lpwstr></property>'
        "</Properties>"
    ).encode("utf-8")
    package = doc.part.package
    part = Part(PackURI(_CUSTOM_PART), _CUSTOM_CT, xml, package)
    package.relate_to(part, _CUSTOM_RT)


def read_stamp(data: bytes) -> dict | None:
    import xml.etree.ElementTree as ET

    import docx

    doc = docx.Document(io.BytesIO(data))
    for part in doc.part.package.iter_parts():
        if str(part.partname) == _CUSTOM_PART:
            root = ET.fromstring(part.blob)
            for prop in root.findall(f"{{{_CUSTOM_NS}}}property"):
                if prop.get("name") == STAMP_PROPERTY:
                    value = prop.find(f"{{{_VT_NS}}}lpwstr")
                    if value is not None and value.text:
                        return json.loads(value.text)
    return None
