"""One self-contained HTML page per result (``--html FILE``), for a reviewer's browser.

Everything the page needs is inside it: the style sheet in a ``<style>`` element, every
figure as inline SVG drawn by matplotlib's SVG back end (sharp at any zoom, text kept as
paths so no font is fetched), no script, no link to any other file or host.  The page
reads on a laptop screen (tables scroll sideways inside their own box when wider than the
window) and prints to A4 (the print style sheet wraps long cells, repeats table heads on
each page and keeps a figure on one page).

A page is described by :class:`Page` (sections of tables, figures and paragraphs) and
written by :func:`render_page`; the commands build their pages in
:mod:`heatweave.reports.html_pages` and :mod:`heatweave.compare.page`.
"""

from __future__ import annotations

import html
import io
import re
from collections.abc import Sequence
from dataclasses import dataclass, field

from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure

from heatweave import __version__
from heatweave.reports.cautions import CAUTION_TEXT
from heatweave.reports.inputs import InputFile


@dataclass(frozen=True, slots=True)
class Table:
    """A table; ``levels`` gives each cell a mark (``""``, ``worse``, ``better``, ``over``,
    ``pass``, ``fail``, ``old``, ``new``) the style sheet colours."""

    caption: str
    head: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    levels: tuple[tuple[str, ...], ...] = ()
    numeric: tuple[bool, ...] = ()  # right-aligned columns


@dataclass(frozen=True, slots=True)
class Section:
    """A heading with its paragraphs, tables and figures (SVG text), in that order."""

    heading: str
    paragraphs: tuple[str, ...] = ()
    tables: tuple[Table, ...] = ()
    figures: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class Page:
    """A whole page: title, verdict line, inputs, method line, sections, warnings."""

    title: str
    verdict: str
    passed: bool | None  # None: nothing was judged
    method: str
    inputs: tuple[tuple[str, tuple[InputFile, ...]], ...]  # (side label, files)
    sections: tuple[Section, ...]
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)


STYLE = """
:root { --ink: #1d232a; --muted: #5b6672; --rule: #d4d9de; --band: #f3f5f7;
  --bad: #b3261e; --badbg: #fde8e6; --warn: #8a5a00; --warnbg: #fff4d6;
  --good: #1e6b34; --goodbg: #e5f4e9; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, -apple-system, "Segoe UI", sans-serif; color: var(--ink);
  max-width: 72rem; margin: 0 auto; padding: 1.2rem 1.5rem 3rem; }
h1 { font-size: 1.45rem; margin: 0 0 .3rem; }
h2 { font-size: 1.12rem; margin: 1.8rem 0 .5rem; border-bottom: 1px solid var(--rule);
  padding-bottom: .2rem; }
p { margin: .35rem 0; }
.verdict { display: inline-block; padding: .25rem .7rem; border-radius: .3rem; font-weight: 600; }
.verdict.pass { background: var(--goodbg); color: var(--good); }
.verdict.fail { background: var(--badbg); color: var(--bad); }
.verdict.none { background: var(--band); color: var(--muted); }
.method, .muted { color: var(--muted); }
.scroll { overflow-x: auto; margin: .4rem 0 1rem; }
table { border-collapse: collapse; font-size: .88rem; font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding: .2rem 0 .35rem; }
th, td { padding: .22rem .55rem; border-bottom: 1px solid var(--rule); text-align: left;
  vertical-align: top; }
th { background: var(--band); font-weight: 600; white-space: nowrap; }
td.num { text-align: right; white-space: nowrap; }
td.hash { font-family: ui-monospace, monospace; font-size: .78rem; word-break: break-all; }
td.worse { background: var(--warnbg); color: var(--warn); }
td.better { color: var(--good); }
td.over, td.fail { background: var(--badbg); color: var(--bad); font-weight: 600; }
td.pass { color: var(--good); }
td.old { background: #f7f7fb; }
figure { margin: .6rem 0 1.2rem; }
figure svg, figure img { width: 100%; height: auto; max-width: 60rem; }
.caution { border-left: 4px solid var(--bad); background: var(--badbg); padding: .6rem .9rem;
  margin: 1.5rem 0; }
ul.warnings li { color: var(--warn); white-space: pre-wrap; font-family: ui-monospace, monospace;
  font-size: .82rem; }
footer { margin-top: 2rem; color: var(--muted); font-size: .8rem; }
@media print {
  @page { size: A4; margin: 14mm 12mm; }
  body { font-size: 9.5pt; max-width: none; padding: 0; }
  .scroll { overflow: visible; }
  table { width: 100%; table-layout: auto; font-size: 7.8pt; }
  th, td { padding: .12rem .3rem; white-space: normal; overflow-wrap: anywhere; }
  td.num { white-space: normal; }
  thead { display: table-header-group; }
  tr, figure { break-inside: avoid; }
  h2 { break-after: avoid; }
  figure svg, figure img { max-width: 100%; }
}
"""


def svg_of(figure: Figure) -> str:
    """A matplotlib figure as an inline ``<svg>`` element (no XML prolog, text as paths,
    no external references)."""
    FigureCanvasSVG(figure)
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    start = text.find("<svg")
    return re.sub(r"<!--.*?-->", "", text[start:], flags=re.S).strip()


def _e(text: str) -> str:
    return html.escape(text, quote=True)


def _table(table: Table) -> str:
    numeric = table.numeric or tuple(False for _ in table.head)
    head = "".join(f"<th scope=col>{_e(h)}</th>" for h in table.head)
    body = []
    for i, row in enumerate(table.rows):
        marks = table.levels[i] if i < len(table.levels) else ()
        cells = []
        for j, cell in enumerate(row):
            classes = " ".join(
                c
                for c in (
                    "num" if j < len(numeric) and numeric[j] else "",
                    marks[j] if j < len(marks) else "",
                )
                if c
            )
            cells.append(
                f"<td class='{classes}'>{_e(cell)}</td>" if classes else f"<td>{_e(cell)}</td>"
            )
        body.append("<tr>" + "".join(cells) + "</tr>")
    return (
        f"<div class=scroll><table><caption>{_e(table.caption)}</caption>"
        f"<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table></div>"
    )


def _inputs(groups: Sequence[tuple[str, tuple[InputFile, ...]]]) -> str:
    rows = []
    for label, files in groups:
        rows += [(label, f.role, f.path, f.sha256) for f in files]
    levels = tuple(("", "", "", "hash") for _ in rows)
    return _table(
        Table("Inputs and their SHA-256", ("side", "role", "file", "sha256"), tuple(rows), levels)
    )


def _section(section: Section) -> str:
    parts = [f"<section><h2>{_e(section.heading)}</h2>"]
    parts += [f"<p>{_e(p)}</p>" for p in section.paragraphs]
    parts += [_table(t) for t in section.tables]
    parts += [f"<figure>{svg}</figure>" for svg in section.figures]
    parts.append("</section>")
    return "".join(parts)


def render_page(page: Page) -> str:
    """The page as one HTML document."""
    state = "none" if page.passed is None else ("pass" if page.passed else "fail")
    warnings = (
        "<section><h2>Warnings</h2><ul class=warnings>"
        + "".join(f"<li>{_e(w)}</li>" for w in page.warnings)
        + "</ul></section>"
        if page.warnings
        else "<section><h2>Warnings</h2><p class=muted>None.</p></section>"
    )
    notes = "".join(f"<p class=muted>{_e(n)}</p>" for n in page.notes)
    return (
        "<!DOCTYPE html>\n<html lang=en><head><meta charset=utf-8>"
        "<meta name=viewport content='width=device-width, initial-scale=1'>"
        f"<title>{_e(page.title)}</title><style>{STYLE}</style></head><body>"
        f"<header><h1>{_e(page.title)}</h1>"
        f"<p><span class='verdict {state}'>{_e(page.verdict)}</span></p>"
        f"<p class=method>{_e(page.method)}</p>{notes}</header>"
        f"<div class=caution><strong>Caution.</strong> {_e(CAUTION_TEXT)}</div>"
        f"<section><h2>Inputs</h2>{_inputs(page.inputs)}</section>"
        + "".join(_section(s) for s in page.sections)
        + warnings
        + f"<footer>Written by heatweave {_e(__version__)}. Self-contained: no scripts, "
        "no external files, nothing fetched.</footer></body></html>\n"
    )
