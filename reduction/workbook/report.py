"""The PDF report of a reduced workbook (matplotlib, Agg backend: no display needed).

Pages: one isochron diagram per system (error ellipses from
:func:`reduction.regression.ellipse_points`, the fitted line, the age with its levels stated, and a
panel of deviations from the line in ppm where the ellipses are visible), the result tables with
every uncertainty's level and form, and the reference values and spike calibrations the numbers
rest on, with the caution that the results depend on them.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple

__all__ = ["CAUTION", "IsochronPanel", "ReportData", "write_report"]

CAUTION = ("Caution: these results depend on the spike calibrations and on the accepted values of the "
           "reference materials listed here, and on the decay constants used. Report them with the ages; "
           "a change in any of them changes every concentration, ratio and age.")


@dataclass(frozen=True)
class IsochronPanel:
    """One isochron to draw: the points used and left out, and the summary quantities."""

    system: str
    x_label: str
    y_label: str
    points: Tuple[Tuple[str, float, float, float, float, float, bool], ...]  # id, x, sx, y, sy, rho, used
    summary: Mapping[str, Any]
    treatment: str = "analytical"
    #: the isochron's name in titles (an isochron group: its name and system); empty: the system
    name: str = ""

    @property
    def label(self) -> str:
        return self.name or self.system


@dataclass(frozen=True)
class ReportData:
    title: str
    source: str
    version: str
    date: str
    results: Tuple[Mapping[str, Any], ...]     # one dict per analysis, keyed by the Results column keys
    isochrons: Tuple[IsochronPanel, ...]
    constants: Tuple[Tuple[Any, ...], ...]     # PROVENANCE_KEYS order: key, quantity, value, 1σ, note, unit, source
    spikes: Tuple[Tuple[Any, ...], ...]
    notes: Tuple[str, ...] = field(default=())
    #: one row per session, ratio and material: session, ratio, material, role, runs, mean normalised,
    #: accepted, mean − accepted (ppm), (ε), z-score
    standards: Tuple[Tuple[Any, ...], ...] = field(default=())


#: Characters of a typed label (analysis ID, sample, fraction) the report prints; results.xlsx holds it whole.
LABEL_CHARS = 40
SHORTENED_NOTE = (f"Labels longer than {LABEL_CHARS} characters (analysis IDs, samples, fractions) are shortened "
                  "here and end in '…'; results.xlsx holds them in full.")


_UNPRINTABLE = {"\t": "\\t", "\r": "\\r"}


def _printable(v: Any) -> str:
    """A typed text as the report prints it: a tab or carriage return shown as ``\\t`` / ``\\r`` (no font
    has a glyph for them), every other character as typed."""
    t = str(v)
    if "\t" in t or "\r" in t:
        t = "".join(_UNPRINTABLE.get(ch, ch) for ch in t)
    return t


def _label(v: Any) -> str:
    """A typed label as the report prints it: at most :data:`LABEL_CHARS` characters, else cut with '…'."""
    t = _printable(v)
    return t if len(t) <= LABEL_CHARS else t[:LABEL_CHARS] + "…"


def _fmt(v: Any, nd: int = 6) -> str:
    if isinstance(v, float):
        if v == 0:
            return "0"
        a = abs(v)
        if a >= 1e4 or a < 1e-3:
            return f"{v:.3e}"
        return f"{v:.{nd}g}"
    return str(v)


def _dec(v: Any, nd: int) -> str:
    if isinstance(v, float):
        return f"{v:.{nd}f}"
    return str(v)


def _sci(v: Any, nd: int = 2) -> str:
    if isinstance(v, float):
        return f"{v:.{nd}e}"
    return str(v)


# Result tables of the report: (key, header, formatter)
_TABLE_CONC = (("analysis", "Analysis", _label), ("sample", "Sample", _label), ("fraction", "Fraction", _label),
               ("system", "System", _label), ("parent_conc", "Parent\n(µg/g)", lambda v: _dec(v, 4)),
               ("parent_conc_1s", "±1σ abs\n(total)", lambda v: _dec(v, 4)),
               ("daughter_conc", "Daughter\n(µg/g)", lambda v: _dec(v, 4)),
               ("daughter_conc_1s", "±1σ abs\n(total)", lambda v: _dec(v, 4)),
               ("blank_share", "Daughter blank\n(% of total)", lambda v: _dec(v, 3)),
               ("check", "Check", str))
_TABLE_RATIOS = (("analysis", "Analysis", _label), ("x", "P/D ratio", lambda v: _dec(v, 6)),
                 ("x_1s", "±1σ abs\n(random)", _sci), ("x_2s_pct", "±2σ %\n(random)", lambda v: _dec(v, 3)),
                 ("x_1s_total", "±1σ abs\n(total)", _sci), ("y", "D ratio", lambda v: _dec(v, 7)),
                 ("y_1s", "±1σ abs\n(random)", _sci), ("y_2s_ppm", "±2σ ppm\n(random)", lambda v: _dec(v, 1)),
                 ("y_1s_total", "±1σ abs\n(total)", _sci), ("rho", "ρ\n(random)", lambda v: _dec(v, 3)),
                 ("eps0", "ε today", lambda v: _dec(v, 2)), ("eps0_2s", "±2σ abs", lambda v: _dec(v, 2)))
_ISO_FMT = {"n": lambda v: _dec(v, 0), "age": lambda v: _dec(v, 2), "age_2s": lambda v: _dec(v, 2),
            "age_2s_lambda": lambda v: _dec(v, 2), "age_2s_total": lambda v: _dec(v, 2),
            "x_scale_1s_pct": lambda v: _dec(v, 4), "age_95": lambda v: _dec(v, 2),
            "initial": lambda v: _dec(v, 7), "initial_2s": lambda v: _dec(v, 7), "eps_t": lambda v: _dec(v, 2),
            "eps_t_2s": lambda v: _dec(v, 2), "mswd": lambda v: _dec(v, 2), "p": lambda v: _dec(v, 3),
            "slope": lambda v: _dec(v, 8), "slope_1s": _sci}


def _axis_labels(system: str) -> Tuple[str, str]:
    if system.lower().startswith("sm"):
        return "$^{147}$Sm/$^{144}$Nd", "$^{143}$Nd/$^{144}$Nd"
    if system.lower().startswith("lu"):
        return "$^{176}$Lu/$^{177}$Hf", "$^{176}$Hf/$^{177}$Hf"
    if system.lower().startswith("rb"):
        return "$^{87}$Rb/$^{86}$Sr", "$^{87}$Sr/$^{86}$Sr"
    return "parent/daughter", "daughter ratio"


def _age_text(p: IsochronPanel) -> str:
    s = p.summary
    lines = [f"{p.label} isochron, {p.treatment} treatment"]
    if isinstance(s.get("age"), float):
        lines.append(f"age = {s['age']:.2f} ± {s['age_2s']:.2f} Ma (2σ, slope only)")
        lines.append(f"      ± {s['age_2s_lambda']:.2f} Ma (2σ, with decay constant)")
        tot = s.get("age_2s_total")
        if isinstance(tot, float):
            lines.append(f"      ± {tot:.2f} Ma (2σ, with decay constant and spike calibration)")
        elif tot:
            lines.append(f"      total with spike calibration: {tot}")
        if isinstance(s.get("age_95"), float):
            lines.append(f"      ± {s['age_95']:.2f} Ma (95 %, t·√MSWD)")
        lines.append(f"initial = {s['initial']:.7f} ± {s['initial_2s']:.7f} (2σ)")
        if isinstance(s.get("eps_t"), float):
            lines.append(f"ε(t) = {s['eps_t']:.2f} ± {s['eps_t_2s']:.2f} (2σ)")
        m, pv = s.get("mswd"), s.get("p")
        lines.append(f"MSWD = {_fmt(m, 3)}, p = {_fmt(pv, 3)}, n = {int(s.get('n', 0))}")
    else:
        lines.append(str(s.get("message", "no fit")))
    return "\n".join(lines)


#: Points of an isochron page labelled with their analysis IDs (more would overprint each other).
LABELLED_POINTS = 30


def _isochron_page(pdf: Any, p: IsochronPanel, data: ReportData) -> None:
    import matplotlib.pyplot as plt
    import numpy as np
    from matplotlib.collections import PolyCollection

    from ..regression import ellipse_points

    fig, (ax, axr) = plt.subplots(2, 1, figsize=(8.27, 11.69), gridspec_kw={"height_ratios": [3, 1.4]})
    xl, yl = _axis_labels(p.system)
    pts = [q for q in p.points]
    xs = np.array([q[1] for q in pts])
    slope = p.summary.get("slope")
    inter = p.summary.get("initial")
    have_fit = isinstance(slope, float) and isinstance(inter, float)
    labelled = len(pts) <= LABELLED_POINTS
    polys: Dict[bool, List[Any]] = {True: [], False: []}
    devs: Dict[bool, List[Any]] = {True: [], False: []}
    for aid, x, sx, y, sy, rho, used in pts:
        ex, ey = ellipse_points(x, sx, y, sy, rho, n_points=64, confidence=0.95)
        polys[bool(used)].append(np.column_stack([ex, ey]))
        if labelled:
            ax.annotate(_label(aid), (x, y), xytext=(6, -10), textcoords="offset points", fontsize=7,
                        color="#333333", parse_math=False)
        if have_fit:
            dev = (ey - (inter + slope * ex)) / (inter + slope * ex) * 1e6
            devs[bool(used)].append(np.column_stack([ex, dev]))
            if labelled:
                axr.annotate(_label(aid), (x, float(np.mean(dev))), xytext=(6, 0), textcoords="offset points",
                             fontsize=7, parse_math=False)
    # one collection per style (used / not used) and axis: a page of a hundred points draws in a blink
    for used in (True, False):
        style = {"facecolors": "#4c72b0" if used else "none", "alpha": 0.55 if used else 1,
                 "edgecolors": "#1f3a68" if used else "#999999", "linewidths": 0.8}
        for axis, shapes in ((ax, polys[used]), (axr, devs[used])):
            if shapes:
                axis.add_collection(PolyCollection(shapes, closed=True, **style))
        centres = [(q[1], q[3]) for q in pts if bool(q[6]) == used]
        if centres:
            ax.plot([c[0] for c in centres], [c[1] for c in centres], ls="none", marker="o", ms=3,
                    color="#1f3a68" if used else "#999999")
    if not labelled:
        ax.text(0.98, 0.06, f"{len(pts)} points: not labelled (more than {LABELLED_POINTS}); the point list is on "
                "the workbook's sheet", transform=ax.transAxes, ha="right", va="bottom", fontsize=7, color="#555555",
                parse_math=False)
    span = xs.max() - xs.min() if len(xs) > 1 else 1.0
    lo, hi = xs.min() - 0.08 * span, xs.max() + 0.08 * span
    xx = np.linspace(max(lo, 0.0) if xs.min() >= 0 else lo, hi, 50)
    if have_fit:
        ax.plot(xx, inter + slope * xx, color="#c44e52", lw=1.0, label="York fit")
        axr.axhline(0.0, color="#c44e52", lw=1.0)
    ax.set_xlim(xx[0], xx[-1])
    ys = np.array([q[3] for q in pts])
    yspan = ys.max() - ys.min() if len(ys) > 1 else abs(ys[0]) * 1e-3
    ax.set_ylim(ys.min() - 0.08 * yspan, ys.max() + 0.12 * yspan)
    ax.set_xlabel(xl)
    ax.set_ylabel(yl)
    ax.ticklabel_format(useOffset=False)
    ax.set_title(f"{p.label} isochron — {data.title}", fontsize=11, parse_math=False)
    ax.text(0.02, 0.98, _age_text(p), transform=ax.transAxes, va="top", ha="left", fontsize=8.5, parse_math=False,
            family="monospace", bbox={"boxstyle": "round", "facecolor": "white", "edgecolor": "#bbbbbb"})
    ax.text(0.98, 0.02, "ellipses: 95 % confidence (2-D); open = not used in the fit", transform=ax.transAxes,
            ha="right", va="bottom", fontsize=7, color="#555555")
    axr.set_xlim(xx[0], xx[-1])
    axr.autoscale(axis="y")
    axr.set_xlabel(xl)
    axr.set_ylabel("deviation from the line (ppm)")
    axr.set_title("Deviations from the fitted line, same ellipses magnified", fontsize=9)
    fig.text(0.5, 0.015, f"{data.source} · RatioDesk {data.version} · {data.date}", ha="center", fontsize=7,
             color="#666666", parse_math=False)
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    pdf.savefig(fig)
    plt.close(fig)


def _table_pages(pdf: Any, title: str, header: Sequence[str], rows: Sequence[Sequence[Any]], data: ReportData,
                 notes: Sequence[str] = (), rows_per_page: int = 26, col_widths: Optional[Sequence[float]] = None,
                 fontsize: float = 6.5, landscape: bool = True, wrap: Optional[Sequence[int]] = None) -> None:
    """Table pages; ``wrap`` gives per column the characters per line (0 = no wrapping)."""
    import textwrap

    import matplotlib.pyplot as plt

    size = (11.69, 8.27) if landscape else (8.27, 11.69)
    chunks = [rows[i:i + rows_per_page] for i in range(0, max(len(rows), 1), rows_per_page)] or [[]]
    for k, chunk in enumerate(chunks):
        fig = plt.figure(figsize=size)
        fig.text(0.04, 0.96, title + (f" (continued {k + 1})" if k else ""), fontsize=12, weight="bold")
        ax = fig.add_axes((0.03, 0.12, 0.94, 0.80))
        ax.axis("off")
        cells = [[_printable(v) if isinstance(v, str) else _fmt(v) for v in r] for r in chunk] or [["" for _ in header]]
        if not wrap:
            _plain_table(fig, (0.03, 0.12, 0.94, 0.80), header, cells, col_widths, fontsize)
        else:
            _wrapped_table(ax, header, cells, col_widths, fontsize, wrap)
        wrapped = [textwrap.wrap(n, 190 if landscape else 130) for n in notes]
        step = 0.018 if landscape else 0.0128            # one 7-pt line as a fraction of the page height
        y = max(0.095, 0.03 + sum(step * len(lines) + 0.008 for lines in wrapped))
        for lines in wrapped:
            fig.text(0.04, y, "\n".join(lines), fontsize=7, va="top", parse_math=False)
            y -= step * len(lines) + 0.008
        fig.text(0.5, 0.005, f"{data.source} · RatioDesk {data.version} · {data.date}", ha="center", parse_math=False,
                 fontsize=7, color="#666666")
        pdf.savefig(fig)
        plt.close(fig)


def _is_number_text(t: str) -> bool:
    try:
        float(t)
    except ValueError:
        return False
    return True


def _plain_table(fig: Any, box: Tuple[float, float, float, float], header: Sequence[str],
                 cells: Sequence[Sequence[str]], col_widths: Optional[Sequence[float]], fontsize: float) -> None:
    """A table of one-line cells drawn as plain texts and one set of rules (several times faster than a
    matplotlib table, which matters for a report of thousands of analyses). Numbers are right-aligned,
    text left-aligned; column widths follow the longest entry unless ``col_widths`` are given."""
    from matplotlib.collections import LineCollection
    from matplotlib.patches import Rectangle

    left, bottom, width, height = box
    ncol = len(header)
    if col_widths:
        weights = [float(w) for w in col_widths]
    else:
        weights = [min(max([len(line) for line in str(h).split("\n")] + [len(r[j]) for r in cells] + [4]), 28) + 2
                   for j, h in enumerate(header)]
    total = sum(weights)
    edges = [left]
    for w in weights:
        edges.append(edges[-1] + width * w / total)
    pitch = fontsize * 2.1 / 72 / fig.get_figheight()                 # one row, as a fraction of the page
    head = pitch * 2.2
    top = bottom + height
    fig.add_artist(Rectangle((left, top - head), width, head, transform=fig.transFigure, facecolor="#e8e8e8",
                             edgecolor="none"))
    numeric = [all(_is_number_text(r[j]) for r in cells if r[j]) and any(r[j] for r in cells) for j in range(ncol)]
    pad = 0.004
    for j, h in enumerate(header):
        x = edges[j + 1] - pad if numeric[j] else edges[j] + pad
        fig.text(x, top - head / 2, str(h), ha="right" if numeric[j] else "left", va="center", fontsize=fontsize,
                 weight="bold", parse_math=False)
    for i, r in enumerate(cells):
        y = top - head - (i + 0.5) * pitch
        for j, t in enumerate(r):
            if t:
                fig.text(edges[j + 1] - pad if numeric[j] else edges[j] + pad, y, t, va="center", fontsize=fontsize,
                         ha="right" if numeric[j] else "left", parse_math=False)
    y_end = top - head - len(cells) * pitch
    segs = [[(left, top), (left + width, top)], [(left, top - head), (left + width, top - head)]]
    segs += [[(left, top - head - (i + 1) * pitch), (left + width, top - head - (i + 1) * pitch)]
             for i in range(len(cells))]
    segs += [[(x, top), (x, y_end)] for x in edges]
    fig.add_artist(LineCollection(segs, transform=fig.transFigure, colors="black", linewidths=0.3))


def _wrapped_table(ax: Any, header: Sequence[str], cells: Sequence[Sequence[str]],
                   col_widths: Optional[Sequence[float]], fontsize: float, wrap: Sequence[int]) -> None:
    """A matplotlib table whose cells wrap (``wrap`` characters per line, 0 = none)."""
    import textwrap

    cells = [["\n".join(textwrap.wrap(t, w)) if w and t else t for t, w in zip(r, wrap)] for r in cells]
    tab = ax.table(cellText=cells, colLabels=list(header), loc="upper center", cellLoc="right",
                   colWidths=list(col_widths) if col_widths else None)
    for cell in tab.get_celld().values():
        cell.get_text().set_parse_math(False)      # typed text is printed as typed, never as mathtext
    tab.auto_set_font_size(False)
    tab.set_fontsize(fontsize)
    tab.scale(1, 1.25)
    for (r, _c), cell in tab.get_celld().items():
        cell.set_linewidth(0.3)
        if r == 0:
            cell.set_facecolor("#e8e8e8")
            cell.set_text_props(weight="bold", wrap=True)
            cell.set_height(cell.get_height() * 2.2)
        else:
            lines = max(t.count("\n") + 1 for t in cells[r - 1])
            cell.set_height(cell.get_height() * lines)
        if r > 0:
            cell.get_text().set_va("center")
            cell.set_text_props(ha="left" if wrap[_c] else "right")
            cell._loc = "left" if wrap[_c] else "right"


#: Warnings printed under each table page; more are listed on the report's Warnings pages instead.
NOTES_PER_PAGE = 6


def _page_notes(notes: Sequence[str]) -> Tuple[str, ...]:
    """The warnings printed under a table page: all of them when few, else a count pointing to the Warnings
    pages (thousands of analyses can each carry one; printed on every page they would fill it)."""
    if len(notes) <= NOTES_PER_PAGE:
        return tuple(notes)
    return (f"{len(notes):,} warnings: see the Warnings pages after the per-analysis tables and the Warnings sheet of "
            "results.xlsx.",)


#: Rows of each per-analysis table the report prints by default (10 pages); every analysis is on the Results
#: sheet of results.xlsx whatever this is, and a table that stops here says so in its title and notes.
REPORT_ROWS = 260


def table_cut_note(shown_rows: int, total: int) -> str:
    """The note of a per-analysis table that lists only its first ``shown_rows`` of ``total`` analyses."""
    return (f"This table lists the first {shown_rows:,} of {total:,} analyses (the report's limit, set with "
            f"`ratiodesk reduce --report-rows N`, 0 = all); every analysis is on the Results sheet of results.xlsx, "
            "written with this report.")


def write_report(data: ReportData, path: Any, *, max_rows: int = REPORT_ROWS) -> None:
    """Write the PDF report to ``path``.

    ``max_rows`` bounds the rows of each per-analysis table (0 = every analysis): drawing a table page costs
    about a second, so a report of thousands of analyses would take minutes and run to hundreds of pages. A
    table that stops at the bound says so in its title and in a note naming results.xlsx, which holds them all.
    """
    import matplotlib

    matplotlib.use("Agg", force=True)
    from matplotlib.backends.backend_pdf import PdfPages

    meta = {"Title": f"RatioDesk report: {data.title}", "Creator": f"RatioDesk {data.version}"}
    with PdfPages(str(path), metadata=meta) as pdf:
        for p in data.isochrons:
            _isochron_page(pdf, p, data)
        legend = ("Parent/daughter (P/D) ratio: 147Sm/144Nd, 176Lu/177Hf or 87Rb/86Sr; daughter (D) ratio: "
                  "143Nd/144Nd, 176Hf/177Hf or 87Sr/86Sr. 1σ abs = one standard deviation, absolute; 2σ % / ppm = "
                  "two standard deviations, relative. Random = measurement (isochron input); total adds spike "
                  "calibration and accepted value.",
                  CAUTION)
        long_labels = any(len(str(r.get(k, ""))) > LABEL_CHARS for r in data.results
                          for k in ("analysis", "sample", "fraction", "system"))
        for title, spec, widths in (("Concentrations per analysis", _TABLE_CONC, None),
                                    ("Isochron inputs per analysis", _TABLE_RATIOS, None)):
            shown_results = data.results[:max_rows] if max_rows > 0 else data.results
            rows = [tuple(f(r.get(k, "")) for k, _h, f in spec) for r in shown_results]
            cut = len(shown_results) < len(data.results)
            if cut:
                title += f" (first {len(shown_results):,} of {len(data.results):,})"
            _table_pages(pdf, title, tuple(h for _k, h, _f in spec), rows, data, col_widths=widths, fontsize=7,
                         notes=(((table_cut_note(len(shown_results), len(data.results)),) if cut else ()) + legend
                                + ((SHORTENED_NOTE,) if long_labels else ()) + _page_notes(data.notes)))
        if len(data.notes) > NOTES_PER_PAGE:
            shown_notes = data.notes[:max_rows] if max_rows > 0 else data.notes
            _table_pages(pdf, "Warnings" + (f" (first {len(shown_notes):,} of {len(data.notes):,})"
                                            if len(shown_notes) < len(data.notes) else ""),
                         ("Warning (where: what)",), [(_printable(w),) for w in shown_notes], data, fontsize=7,
                         rows_per_page=20, col_widths=(1.0,), wrap=(200,),
                         notes=(f"Every warning ({len(data.notes):,}) is on the Warnings sheet of results.xlsx.",))
        from .sheets import ISOCHRON_QUANTITIES

        iso_rows: List[Tuple[Any, ...]] = []
        for q, label, unit in ISOCHRON_QUANTITIES:
            fmt = _ISO_FMT.get(q, str)
            iso_rows.append((label, *[fmt(p.summary.get(q, "")) for p in data.isochrons], unit))
        _table_pages(pdf, "Isochron summaries", ("Quantity", *[p.label for p in data.isochrons], "Unit / level"),
                     iso_rows, data, fontsize=8, landscape=False, wrap=(56,) + (0,) * (len(data.isochrons) + 1),
                     col_widths=(0.46,) + (0.54 / (len(data.isochrons) + 1),) * (len(data.isochrons) + 1),
                     notes=("Fit: York et al. 2004 (Am. J. Phys. 72, 367). Scatter treatment as stated on each "
                            "isochron page. Ages use the decay constants listed under reference values. The spike's "
                            "parent/daughter calibration scales every x of an isochron alike (slope b -> b/k); it "
                            "enters the total only (first order, added in quadrature). The reference-material "
                            "accepted value scales every y alike and is not included (its relative σ is far smaller).",
                            CAUTION))
        from .provenance import PROVENANCE_HEADER

        _table_pages(pdf, "Reference values used (Constants sheet)", PROVENANCE_HEADER, data.constants, data,
                     col_widths=(0.11, 0.13, 0.08, 0.07, 0.27, 0.04, 0.30), fontsize=6, rows_per_page=12,
                     wrap=(22, 22, 0, 0, 60, 0, 62),
                     notes=("How the 1σ was set: the published uncertainty and its confidence level, converted to 1σ. "
                            "Status 'recalled from memory' marks a value, level or citation that was not checked "
                            "against the original publication: check it before reporting.", CAUTION))
        if data.standards:
            _table_pages(pdf, "Reference materials per session: the primary and the checks (Standards sheet)",
                         ("Session", "Ratio", "Material", "Role", "Runs", "Mean normalised", "Accepted",
                          "Mean − accepted (ppm)", "Mean − accepted (ε)", "z-score"), data.standards, data,
                         fontsize=7, notes=(
                             "Each session is normalised to ONE primary material: factor = its accepted value / the "
                             "mean of its runs. Every other material is a check, normalised with that factor and "
                             "compared with its accepted value; checks never enter the factor. z = deviation / "
                             "(check's standard error, factor's random σ and both accepted values' σ, in "
                             "quadrature).", CAUTION))
        _table_pages(pdf, "Spike calibrations used (Spikes sheet)", ("Spike", "Element", "Calibrated on",
                                                                     "Spike isotope", "µmol/g", "1σ (abs, µmol/g)"),
                     data.spikes, data, fontsize=8, notes=(CAUTION,))
