"""HTML building blocks of the run report: page, sections, tables and figures.

Plain f-strings with :func:`html.escape` on every value that comes from data. The page is
self-contained: styles are inline, figures are inline SVG elements, there is no script and
no address of any other site; the only links are relative ones to the figure files of the
run folder and anchors within the page.
"""

from __future__ import annotations

import html
import math
import re
from typing import Iterable

import numpy as np
import pandas as pd

from pipelines.report.style import SavedFigure, inline_svg

__all__ = ["esc", "fmt", "anchor", "page", "section", "table_html", "figure_html", "note_html",
           "key_value_html", "list_html", "range_text", "probability_text", "header_with_units"]

#: the minus sign (U+2212) of printed negative numbers: "−79", not the hyphen "-79"
MINUS = "\u2212"

#: column-name endings -> the unit shown in a table header (``depth_cm`` -> "depth [cm]")
UNIT_SUFFIXES = (("_yr_cm", "yr/cm"), ("_cal_bp", "cal BP"), ("_14c_bp", "14C yr BP"),
                 ("_mmol_mol", "mmol/mol"), ("_percent", "%"), ("_permil", "‰"), ("_degc", "°C"),
                 ("_cm", "cm"), ("_mm", "mm"), ("_yr", "yr"), ("_s", "s"))

CSS = """
:root { --ink: #20262b; --muted: #5a646b; --rule: #d5dde1; --paper: #fbfaf7;
        --accent: #3d5a6c; --warn: #a4492f; --ok: #3c5a2a; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink);
       font: 15px/1.5 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
header.top { padding: 1.6rem 2rem 1rem; border-bottom: 3px double var(--ink); background: #fff; }
header.top h1 { margin: 0 0 .3rem; font-size: 1.55rem; letter-spacing: .01em; }
header.top .sub { color: var(--muted); }
main { max-width: 62rem; margin: 0 auto; padding: 0 1.5rem 3rem; }
nav.toc { margin: 1.2rem 0; padding: .6rem 1rem; border-left: 4px solid var(--accent);
          background: #fff; }
nav.toc ol { margin: .2rem 0; padding-left: 1.3rem; columns: 2; }
h2 { margin-top: 2.4rem; padding-bottom: .2rem; border-bottom: 1px solid var(--ink);
     font-size: 1.3rem; }
h3 { margin-top: 1.6rem; font-size: 1.05rem; color: var(--accent); text-transform: uppercase;
     letter-spacing: .06em; }
section.core { page-break-before: always; }
.table-box { max-width: 100%; overflow-x: auto; margin: .6rem 0 1rem; }
.table-box table.data { margin: 0; }
table.data { border-collapse: collapse; margin: .6rem 0 1rem; font-size: .86rem; background: #fff; }
table.data th, table.data td { padding: .25rem .6rem; border-bottom: 1px solid var(--rule);
     text-align: left; vertical-align: top; }
table.data th { border-bottom: 2px solid var(--ink); font-weight: 600; }
table.data td.num { text-align: right; font-variant-numeric: tabular-nums; }
table.kv th { font-weight: 600; color: var(--muted); padding-right: 1rem;
              border-bottom: 1px solid var(--rule); }
table.data td:first-child { white-space: nowrap; }
.status { font-weight: 700; white-space: nowrap; }
.status.ok { color: var(--ok); }
.status.failed { color: var(--warn); text-decoration: underline; }
.status.thin, .status.dated { color: var(--warn); font-style: italic; }
figure.plot { margin: 1rem 0 1.6rem; padding: .6rem; background: #fff;
              border: 1px solid var(--rule); page-break-inside: avoid; }
figure.plot svg { width: 100%; height: auto; display: block; }
figcaption { font-size: .86rem; color: var(--muted); margin-top: .4rem; }
figcaption b { color: var(--ink); }
figcaption a { color: var(--accent); }
.note { border-left: 4px solid var(--warn); background: #fff; padding: .4rem .8rem;
        margin: .6rem 0; font-size: .9rem; }
.note.info { border-left-color: var(--accent); }
ul.warnings li { margin: .15rem 0; }
footer { color: var(--muted); font-size: .8rem; border-top: 1px solid var(--rule);
         margin-top: 3rem; padding-top: .6rem; }
@media print { body { background: #fff; } nav.toc { display: none; }
               figure.plot { border: none; } a { color: inherit; text-decoration: none; } }
"""


def esc(value: object) -> str:
    """HTML-escaped text of a value."""
    return html.escape(str(value), quote=True)


def fmt(value: object) -> str:
    """A table cell: numbers to four significant digits, missing as an en dash."""
    if value is None:
        return "–"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value)}"
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(float(value)):
            return "–"
        v = float(value)
        return f"{v:.0f}" if abs(v) >= 1e4 else f"{v:.4g}"
    if isinstance(value, (list, tuple, np.ndarray)):
        return "; ".join(fmt(v) for v in value)
    text = str(value)
    return text if text.strip() else "–"


def _signed(value: float, digits: int) -> str:
    return f"{value:.{digits}f}".replace("-", MINUS)


def range_text(low: float, high: float, digits: int = 0) -> str:
    """A range as printed in the report: ``"−79 to −59"`` (true minus signs, and "to", so a
    negative bound cannot be read as a dash)."""
    return f"{_signed(low, digits)} to {_signed(high, digits)}"


def probability_text(p: float) -> str:
    """A probability as printed: two decimals, ``"< 0.001"`` when tiny, ``"n/a"`` when missing."""
    if p is None or not math.isfinite(float(p)):
        return "n/a"
    p = float(p)
    if p < 0.001:
        return "< 0.001"
    return f"{p:.3f}" if p < 0.01 else f"{p:.2f}"


def header_with_units(column: str) -> str:
    """``"depth_cm"`` -> ``"depth [cm]"``; names without a known unit ending are kept."""
    lowered = column.lower()
    for suffix, unit in UNIT_SUFFIXES:
        if lowered.endswith(suffix) and len(column) > len(suffix):
            return f"{column[:-len(suffix)].replace('_', ' ')} [{unit}]"
    return column


def anchor(text: str) -> str:
    """An id usable as an in-page anchor."""
    return re.sub(r"[^A-Za-z0-9_-]+", "-", text).strip("-").lower() or "x"


def table_html(table: pd.DataFrame, columns: Iterable[str] | None = None,
               headers: dict[str, str] | None = None, css_class: str = "data") -> str:
    """A DataFrame as an HTML table (numbers right-aligned, unit endings of column names shown
    as units in the header), in a box that scrolls sideways when the table is wider than the
    page."""
    columns = [c for c in (columns or table.columns) if c in table.columns]
    headers = headers or {}
    head = "".join(f"<th>{esc(headers.get(c, header_with_units(str(c))))}</th>" for c in columns)
    body = []
    for _, row in table.iterrows():
        cells = []
        for c in columns:
            value = row[c]
            numeric = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
                value, (bool, np.bool_))
            cls = ' class="num"' if numeric else ""
            cells.append(f"<td{cls}>{esc(fmt(value))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return (f'<div class="table-box"><table class="{css_class}"><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def key_value_html(items: list[tuple[str, object]]) -> str:
    """A two-column table of labels and values."""
    rows = "".join(f"<tr><th>{esc(k)}</th><td>{esc(fmt(v))}</td></tr>" for k, v in items)
    return f'<div class="table-box"><table class="data kv"><tbody>{rows}</tbody></table></div>'


def list_html(items: Iterable[str], css_class: str = "") -> str:
    entries = "".join(f"<li>{esc(i)}</li>" for i in items)
    cls = f' class="{css_class}"' if css_class else ""
    return f"<ul{cls}>{entries}</ul>" if entries else ""


def note_html(text: str, kind: str = "") -> str:
    """A highlighted remark (``kind="info"`` for neutral ones)."""
    cls = "note" + (f" {kind}" if kind else "")
    return f'<p class="{cls}">{esc(text)}</p>'


def figure_html(saved: SavedFigure, number: int) -> str:
    """A numbered figure: inline SVG, caption and relative links to its SVG (and PNG) file."""
    svg = inline_svg(saved.svg_text, f"f{number}")
    links = [("SVG", saved.svg)] + ([("PNG", saved.png)] if saved.png else [])
    files = " · ".join(f'<a href="{esc(path)}">{name}</a>' for name, path in links)
    svg = svg.replace('role="img"', f'role="img" aria-label="{esc(saved.title)}"', 1)
    return (f'<figure class="plot" id="fig-{esc(saved.key)}" data-figure="{esc(saved.key)}">'
            f"{svg}<figcaption><b>Figure {number}. {esc(saved.title)}.</b> {esc(saved.caption)} "
            f"Files: {files}."
            "</figcaption></figure>")


def section(id_: str, title: str, body: str, css_class: str = "", level: int = 2) -> str:
    cls = f' class="{css_class}"' if css_class else ""
    return f'<section id="{esc(id_)}"{cls}><h{level}>{esc(title)}</h{level}>{body}</section>'


def page(title: str, subtitle: str, toc: list[tuple[str, str]], body: str, footer: str) -> str:
    """The whole document."""
    toc_items = "".join(f'<li><a href="#{esc(a)}">{esc(t)}</a></li>' for a, t in toc)
    return ("<!DOCTYPE html>\n"
            '<html lang="en"><head><meta charset="utf-8">'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{esc(title)}</title><style>{CSS}</style></head><body>"
            f'<header class="top"><h1>{esc(title)}</h1><div class="sub">{esc(subtitle)}</div></header>'
            f'<main><nav class="toc"><b>Contents</b><ol>{toc_items}</ol></nav>{body}'
            f"<footer>{esc(footer)}</footer></main></body></html>\n")
