"""A small OpenDocument spreadsheet (.ods) writer for RatioDesk layouts (standard library only).

Writes the cells of a :data:`reduction.workbook.Layout`: values, formulas (``of:=`` OpenFormula with
the add-in's stored names) with their cached values, the input/computed look, number formats,
column widths and sheet protection without a password (one click in Tools ▸ Protect Sheet). The
Isochron sheet gets one embedded ODF chart object per system (``Object N/``, ODF 1.2 part 1 §10
``chart:chart``, class ``chart:scatter``): the 95 % error-ellipse outlines of its selection rows as
lines without symbols, read live from the ellipse cells, as the .xlsx writer draws them.
"""
from __future__ import annotations

import math
import re
import zipfile
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple
from xml.sax.saxutils import escape, quoteattr

from reduction.workbook import (
    SHEET_ORDER,
    WIDTHS,
    CellSpec,
    Layout,
    LogicalCell,
    check_text,
    choice_cells,
    choices,
    col_letter,
    isochron_charts,
)

NS = ('xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
      'xmlns:style="urn:oasis:names:tc:opendocument:xmlns:style:1.0" '
      'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" '
      'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
      'xmlns:fo="urn:oasis:names:tc:opendocument:xmlns:xsl-fo-compatible:1.0" '
      'xmlns:number="urn:oasis:names:tc:opendocument:xmlns:datastyle:1.0" '
      'xmlns:of="urn:oasis:names:tc:opendocument:xmlns:of:1.2" '
      'xmlns:meta="urn:oasis:names:tc:opendocument:xmlns:meta:1.0" '
      'xmlns:config="urn:oasis:names:tc:opendocument:xmlns:config:1.0" '
      'xmlns:xlink="http://www.w3.org/1999/xlink" '
      'xmlns:draw="urn:oasis:names:tc:opendocument:xmlns:drawing:1.0" '
      'xmlns:svg="urn:oasis:names:tc:opendocument:xmlns:svg-compatible:1.0" '
      'xmlns:loext="urn:org:documentfoundation:names:experimental:office:xmlns:loext:1.0"')

_FILL = {"input": "#fff6d5", "computed": "#e2ecf8", "header": "#d9d9d9"}
_TEXT = {"title": 'fo:font-weight="bold" fo:font-size="13pt"', "note": 'fo:font-style="italic" fo:color="#555555"',
         "header": 'fo:font-weight="bold"', "key": 'fo:font-size="7pt" fo:color="#888888"',
         "label": 'fo:font-weight="bold"'}


def _number_style(name: str, fmt: str) -> str:
    m = re.fullmatch(r"0(?:\.(0+))?E\+(0+)", fmt)
    if m:
        d = len(m.group(1) or "")
        return (f'<number:number-style style:name="{name}"><number:scientific-number number:decimal-places="{d}" '
                f'number:min-integer-digits="1" number:min-exponent-digits="{len(m.group(2))}"/>'
                f"</number:number-style>")
    m = re.fullmatch(r"0(?:\.(0+))?", fmt)
    d = len(m.group(1) or "") if m else 2
    return (f'<number:number-style style:name="{name}"><number:number number:decimal-places="{d}" '
            f'number:min-integer-digits="1"/></number:number-style>')


class _Styles:
    def __init__(self) -> None:
        self.cells: Dict[Tuple[str, str], str] = {}
        self.numbers: Dict[str, str] = {}
        self.columns: Dict[float, str] = {}

    def cell(self, style: str, fmt: str) -> str:
        key = (style, fmt)
        if key not in self.cells:
            self.cells[key] = f"ce{len(self.cells) + 1}"
            if fmt != "General" and fmt not in self.numbers:
                self.numbers[fmt] = f"N{len(self.numbers) + 100}"
        return self.cells[key]

    def column(self, width_chars: float) -> str:
        if width_chars not in self.columns:
            self.columns[width_chars] = f"co{len(self.columns) + 1}"
        return self.columns[width_chars]

    def xml(self) -> str:
        out = ['<style:style style:name="ta1" style:family="table"><style:table-properties table:display="true"/>'
               "</style:style>"]
        for w, name in self.columns.items():
            out.append(f'<style:style style:name="{name}" style:family="table-column"><style:table-column-properties '
                       f'style:column-width="{w * 0.21:.2f}cm"/></style:style>')
        for fmt, name in self.numbers.items():
            out.append(_number_style(name, fmt))
        for (style, fmt), name in self.cells.items():
            ds = f' style:data-style-name="{self.numbers[fmt]}"' if fmt != "General" else ""
            props = ['style:cell-protect="none"' if style == "input" else 'style:cell-protect="protected"']
            if style in _FILL:
                props.append(f'fo:background-color="{_FILL[style]}"')
            if style == "header":
                props.append('fo:wrap-option="wrap"')
            text = f"<style:text-properties {_TEXT[style]}/>" if style in _TEXT else ""
            out.append(f'<style:style style:name="{name}" style:family="table-cell" '
                       f'style:parent-style-name="Default"{ds}><style:table-cell-properties {" ".join(props)}/>'
                       f"{text}</style:style>")
        return "".join(out)


def _display(v: Any) -> str:
    if isinstance(v, float):
        return repr(v) if not v.is_integer() else str(int(v))
    return str(v)


def _cell_xml(spec: Optional[CellSpec], sheet: str, styles: _Styles, values_only: bool, where: str = "",
              validation: Optional[str] = None) -> str:
    if spec is None:
        return "<table:table-cell/>"
    attrs = [f'table:style-name="{styles.cell(spec.style, spec.number_format)}"']
    if validation:
        attrs.append(f'table:content-validation-name="{validation}"')
    if spec.formula is not None and not values_only:
        attrs.append("table:formula=" + quoteattr(spec.formula.render(sheet, "ods")))
        if spec.array:
            attrs.append(f'table:number-matrix-rows-spanned="{spec.array[0]}" '
                         f'table:number-matrix-columns-spanned="{spec.array[1]}"')
    v = spec.value
    if isinstance(v, (bool, LogicalCell)):       # a logical value stays logical (ODF 1.2: office:boolean-value)
        truth = v if isinstance(v, bool) else str.__str__(v) == "TRUE"
        attrs.append(f'office:value-type="boolean" office:boolean-value="{"true" if truth else "false"}"')
        return f"<table:table-cell {' '.join(attrs)}><text:p>{'TRUE' if truth else 'FALSE'}</text:p></table:table-cell>"
    if isinstance(v, int):
        v = float(v)
    if isinstance(v, float) and math.isfinite(v):
        attrs.append(f'office:value-type="float" office:value="{v!r}"')
        return f"<table:table-cell {' '.join(attrs)}><text:p>{_display(v)}</text:p></table:table-cell>"
    if v in ("", None):
        if spec.formula is not None and not values_only:
            attrs.append('office:value-type="string" office:string-value=""')
        return f"<table:table-cell {' '.join(attrs)}/>"
    text = check_text(v, sheet, where) if isinstance(v, str) else str(v)
    attrs.append('office:value-type="string"')
    return f"<table:table-cell {' '.join(attrs)}>{_paragraphs(text)}</table:table-cell>"


_SPACES = re.compile(r" {2,}|^ | $")


def _paragraphs(text: str) -> str:
    """A cell's text as ``text:p`` elements that read back exactly, in LibreOffice and in
    :func:`reduction.workbook.read_ods`: one paragraph per line, tabs as ``text:tab``, runs of spaces
    (and a leading or trailing space) as ``text:s`` (ODF 1.2 part 1 collapses white space
    otherwise), a carriage return as a character reference. Text is always cell *content*: never a
    formula, whatever it starts with."""
    out = []
    for line in text.split("\n"):
        parts = []
        for k, piece in enumerate(line.split("\t")):
            if k:
                parts.append("<text:tab/>")
            esc = escape(piece).replace("\r", "&#13;")
            parts.append(_SPACES.sub(lambda m: f'<text:s text:c="{len(m.group())}"/>', esc))
        out.append("<text:p>" + "".join(parts) + "</text:p>")
    return "".join(out)


CHART_NS = ('xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
            'xmlns:style="urn:oasis:names:tc:opendocument:xmlns:style:1.0" '
            'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" '
            'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
            'xmlns:chart="urn:oasis:names:tc:opendocument:xmlns:chart:1.0" '
            'xmlns:draw="urn:oasis:names:tc:opendocument:xmlns:drawing:1.0" '
            'xmlns:svg="urn:oasis:names:tc:opendocument:xmlns:svg-compatible:1.0" '
            'xmlns:fo="urn:oasis:names:tc:opendocument:xmlns:xsl-fo-compatible:1.0" '
            'xmlns:number="urn:oasis:names:tc:opendocument:xmlns:datastyle:1.0" '
            'xmlns:xlink="http://www.w3.org/1999/xlink"')


def _isochron_charts() -> List[Tuple[str, str, str, Tuple[int, int], str]]:
    """(object name, chart content.xml, draw:frame xml, anchor cell, sheet) of the template's charts
    (reduction.workbook.isochron_charts: per system the isochron and its deviation plot; the group drawn).

    Each frame is anchored to a cell (the .xlsx chart's anchor, below the summary block), so row
    heights do not move it onto the cells. An empty row between two outlines of one series is a gap.
    """
    out = []
    for k, spec in enumerate(isochron_charts()):
        frame_name, title, (xl, yl), yfmt, anchor, sh = (spec.name, spec.title, spec.axes, spec.y_format,
                                                         spec.anchor, spec.sheet)
        series, ranges = [], []
        for left, top, last in spec.series:
            xc, yc = col_letter(left), col_letter(left + 1)
            xr, yr = f"{sh}.{xc}{top}:{sh}.{xc}{last}", f"{sh}.{yc}{top}:{sh}.{yc}{last}"
            ranges.append(f"{sh}.{xc}{top}:{sh}.{yc}{last}")
            series.append(f'<chart:series chart:style-name="ser" chart:class="chart:scatter" '
                          f'chart:values-cell-range-address="{yr}"><chart:domain table:cell-range-address="{xr}"/>'
                          f"</chart:series>")
        ydig = len(yfmt.partition(".")[2])
        content = (f'<?xml version="1.0" encoding="UTF-8"?><office:document-content {CHART_NS} office:version="1.2">'
                   "<office:automatic-styles>"
                   '<style:style style:name="pa" style:family="chart"><style:chart-properties chart:lines="true" '
                   'chart:symbol-type="none" chart:treat-empty-cells="leave-gap"/></style:style>'
                   '<style:style style:name="ser" style:family="chart"><style:chart-properties chart:lines="true" '
                   'chart:symbol-type="none"/><style:graphic-properties draw:stroke="solid" '
                   'svg:stroke-color="#1f3a68" svg:stroke-width="0.03cm"/></style:style>'
                   + "".join(_number_style(f"N{d}", "0." + "0" * d if d else "0") +
                             f'<style:style style:name="ax{d}" style:family="chart" style:data-style-name="N{d}">'
                             '<style:chart-properties chart:display-label="true" chart:tick-marks-major-outer="true" '
                             'chart:link-data-style-to-source="false"/></style:style>'
                             for d in sorted({2, ydig})) +
                   "</office:automatic-styles><office:body><office:chart>"
                   f'<chart:chart svg:width="16cm" svg:height="8.6cm" chart:class="chart:scatter">'
                   f"<chart:title><text:p>{escape(title)}</text:p></chart:title>"
                   f'<chart:plot-area chart:style-name="pa" table:cell-range-address="{" ".join(ranges)}" '
                   'chart:data-source-has-labels="none">'
                   f'<chart:axis chart:dimension="x" chart:name="primary-x" chart:style-name="ax2">'
                   f"<chart:title><text:p>{escape(xl)}</text:p>"
                   "</chart:title></chart:axis>"
                   f'<chart:axis chart:dimension="y" chart:name="primary-y" chart:style-name="ax{ydig}">'
                   f"<chart:title><text:p>{escape(yl)}</text:p>"
                   "</chart:title><chart:grid chart:class=\"major\"/></chart:axis>"
                   f"{''.join(series)}</chart:plot-area></chart:chart></office:chart></office:body>"
                   "</office:document-content>")
        name = f"Object {k + 1}"
        frame = (f'<draw:frame draw:z-index="{k}" draw:name={quoteattr(frame_name)} '
                 'svg:width="16cm" svg:height="8.6cm" svg:x="0cm" svg:y="0cm"><draw:object '
                 f'draw:notify-on-update-of-ranges="{" ".join(ranges)}" xlink:href="./{name}" xlink:type="simple" '
                 'xlink:show="embed" xlink:actuate="onLoad"/></draw:frame>')
        out.append((name, content, frame, anchor, sh))
    return out


def _table_xml(name: str, cells: Mapping[Tuple[int, int], CellSpec], styles: _Styles, values_only: bool,
               protect: bool, anchored: Optional[Mapping[Tuple[int, int], str]] = None) -> str:
    """One sheet; ``anchored`` maps a cell to the draw:frame xml anchored in it."""
    anchored = anchored or {}
    n_rows = max([r for r, _c in cells] + [r for r, _c in anchored], default=0)
    n_cols = max([c for _r, c in cells] + [c for _r, c in anchored], default=0) + 1
    prot = ' table:protected="true"' if protect else ""
    out = [f"<table:table table:name={quoteattr(name)} table:style-name=\"ta1\"{prot}>"]
    widths = WIDTHS.get(name, {})
    for j in range(n_cols):
        out.append(f'<table:table-column table:style-name="{styles.column(widths.get(j, 12.0))}" '
                   f'table:default-cell-style-name="Default"/>')
    dv = {} if values_only else {(r, c): ch.name for (s, r, c), ch in choice_cells().items() if s == name}
    for r in range(1, n_rows + 1):
        row = [_cell_xml(cells.get((r, c)), name, styles, values_only, f"{col_letter(c)}{r}", dv.get((r, c)))
               for c in range(n_cols)]
        for (ar, ac), frame in anchored.items():
            if ar == r:
                x = row[ac]
                row[ac] = (x[:-2] + ">" + frame + "</table:table-cell>" if x.endswith("/>") else
                           x.replace(">", ">" + frame, 1))
        out.append("<table:table-row>" + "".join(row) + "</table:table-row>")
    out.append("</table:table>")
    return "".join(out)


def _rows_as_cells(rows: Sequence[Sequence[Any]]) -> Dict[Tuple[int, int], CellSpec]:
    out: Dict[Tuple[int, int], CellSpec] = {}
    for r, row in enumerate(rows, start=1):
        for c, v in enumerate(row):
            if v not in ("", None):
                out[(r, c)] = CellSpec(v, style="header" if r == 1 else "plain")
    return out


def _validations_xml() -> str:
    """ODF 1.2 table:content-validations for the template's drop-down lists (reduction.workbook.choices)."""
    out = ["<table:content-validations>"]
    for c in choices():
        if c.whole_0_1:
            cond = "of:cell-content-is-whole-number() and cell-content-is-between(0,1)"  # as LibreOffice writes it
        elif c.source is not None:
            sheet, letter, r1, r2 = c.source_range()
            cond = f"of:cell-content-is-in-list([${sheet}.${letter}${r1}:.${letter}${r2}])"
        else:
            cond = "of:cell-content-is-in-list(" + ";".join('"' + v.replace('"', '""') + '"' for v in c.values) + ")"
        base = f"{c.sheet}.{col_letter(c.col)}{min(c.rows)}"
        kind = "stop" if c.strict else "warning"
        msg = (f"{c.title}: choose a value from the list" if c.strict else
               f"{c.title}: not one of the usual values; keep it?")
        listing = "" if c.whole_0_1 else ' table:display-list="unsorted"'
        out.append(f"<table:content-validation table:name={quoteattr(c.name)} table:condition={quoteattr(cond)} "
                   f'table:allow-empty-cell="true"{listing} table:base-cell-address={quoteattr(base)}>'
                   f'<table:help-message table:title={quoteattr(c.title)} table:display="true">'
                   f"<text:p>{escape(c.help)}</text:p></table:help-message>"
                   f'<table:error-message table:title="RatioDesk" table:message-type="{kind}" table:display="true">'
                   f"<text:p>{escape(msg)}</text:p></table:error-message></table:content-validation>")
    out.append("</table:content-validations>")
    return "".join(out)


def write_ods(lay: Layout, path: Any, *, values_only: bool = False, protect: bool = True,
              extra_sheets: Optional[Mapping[str, Sequence[Sequence[Any]]]] = None) -> None:
    """Write a layout as an .ods file (formulas with cached values unless ``values_only``)."""
    styles = _Styles()
    names = [s for s in SHEET_ORDER if s in lay] + [s for s in lay if s not in SHEET_ORDER]
    tables: List[str] = []
    charts = [c for c in _isochron_charts() if c[4] in lay] if not values_only else []
    for name in names:
        tables.append(_table_xml(name, lay[name], styles, values_only,
                                 protect and not values_only and name != SHEET_ORDER[0],
                                 anchored={a: f for _n, _c, f, a, sh in charts if sh == name}))
    for name, rows in (extra_sheets or {}).items():
        tables.append(_table_xml(name, _rows_as_cells(rows), styles, True, False))
    validations = "" if values_only else _validations_xml()
    content = (f'<?xml version="1.0" encoding="UTF-8"?><office:document-content {NS} office:version="1.2">'
               f"<office:automatic-styles>{styles.xml()}</office:automatic-styles>"
               f"<office:body><office:spreadsheet>{validations}{''.join(tables)}</office:spreadsheet></office:body>"
               f"</office:document-content>")
    styles_xml = (f'<?xml version="1.0" encoding="UTF-8"?><office:document-styles {NS} office:version="1.2">'
                  '<office:styles><style:style style:name="Default" style:family="table-cell"/></office:styles>'
                  "</office:document-styles>")
    manifest = ('<?xml version="1.0" encoding="UTF-8"?>'
                '<manifest:manifest xmlns:manifest="urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" '
                'manifest:version="1.2">'
                '<manifest:file-entry manifest:full-path="/" manifest:version="1.2" '
                'manifest:media-type="application/vnd.oasis.opendocument.spreadsheet"/>'
                '<manifest:file-entry manifest:full-path="content.xml" manifest:media-type="text/xml"/>'
                '<manifest:file-entry manifest:full-path="styles.xml" manifest:media-type="text/xml"/>'
                + "".join(f'<manifest:file-entry manifest:full-path="{n}/" manifest:version="1.2" '
                          'manifest:media-type="application/vnd.oasis.opendocument.chart"/>'
                          f'<manifest:file-entry manifest:full-path="{n}/content.xml" manifest:media-type="text/xml"/>'
                          for n, _c, _f, _a, _s in charts)
                + "</manifest:manifest>")
    with zipfile.ZipFile(str(path), "w") as z:
        z.writestr(zipfile.ZipInfo("mimetype"), "application/vnd.oasis.opendocument.spreadsheet",
                   compress_type=zipfile.ZIP_STORED)
        z.writestr("content.xml", content, compress_type=zipfile.ZIP_DEFLATED)
        z.writestr("styles.xml", styles_xml, compress_type=zipfile.ZIP_DEFLATED)
        for n, c, _f, _a, _s in charts:
            z.writestr(f"{n}/content.xml", c, compress_type=zipfile.ZIP_DEFLATED)
        z.writestr("META-INF/manifest.xml", manifest, compress_type=zipfile.ZIP_DEFLATED)


__all__ = ["write_ods"]
