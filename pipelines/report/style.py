"""The report's look: palette, line styles, Matplotlib settings and deterministic saving.

Our own palette, chosen to survive grey-scale printing: series are told apart by lightness,
line style and marker as well as by hue. Every figure is drawn once, as SVG (the report shows
it inline), with text kept as text, and artists holding thousands of points (ensemble lines,
date densities, long bands) rasterised inside the SVG at :data:`RASTER_DPI`, so a figure
stays light whatever the ensemble size. A PNG copy is drawn only on request. Dates and
software stamps are removed and the SVG hash salt is fixed, so a rerun gives byte-identical
files.
"""

from __future__ import annotations

import contextlib
import io
import pathlib
import re
from dataclasses import dataclass
from typing import Iterator

import matplotlib

matplotlib.use("Agg", force=True)

from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import LogFormatter  # noqa: E402

from pipelines.report.layout import place_panels  # noqa: E402
from pipelines.runfolder import atomic_write_bytes  # noqa: E402

__all__ = ["INK", "SLATE", "SAND", "CLAY", "MOSS", "FOG", "PAPER", "BAND_DARK", "BAND_LIGHT",
           "WARM", "COOL", "SERIES_STYLES", "report_style", "new_figure", "SavedFigure",
           "save_figure", "inline_svg", "age_axis", "plain_log_labels", "rasterise_dense", "ensemble_lines",
           "without_embedded_pictures"]

# Palette (hex). Lightness (L* roughly) in brackets: the grey-scale print keeps them apart.
INK = "#20262b"        # near-black blue-grey: medians, text            [L* 15]
SLATE = "#3d5a6c"      # dark slate blue: second series, ensemble lines [L* 37]
MOSS = "#6b7b3a"       # olive: accumulation, probabilities             [L* 50]
CLAY = "#a4492f"       # brick: outliers, warm anomalies, events        [L* 45]
SAND = "#d9b26f"       # sand: date densities                           [L* 75]
FOG = "#c9d3d8"        # pale blue-grey: 95 % bands                     [L* 84]
PAPER = "#fbfaf7"      # off-white background of the page
BAND_LIGHT = "#d5dde1"  # 95 % band
BAND_DARK = "#9fb1bb"   # 68 % band
WARM = "#8e3b26"       # positive anomaly fill (dark)
COOL = "#b9cbd6"       # negative anomaly fill (light, hatched)

#: (colour, line style, marker) for the i-th series of a panel: distinct without colour
SERIES_STYLES = (
    (INK, "-", "o"),
    (CLAY, "--", "s"),
    (SLATE, "-.", "^"),
    (MOSS, ":", "D"),
    ("#7a5c8a", (0, (5, 1, 1, 1)), "v"),
    ("#5c5c5c", (0, (1, 1)), "x"),
)

_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.titlesize": 9.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    # titles sit on the panel's top (not moved past decorations: the report has no ticks on
    # top, and with no offset text on an axis there is nothing there; saves a measuring pass)
    "axes.titley": 1.0,
    "axes.formatter.useoffset": False,
    "axes.labelsize": 8.5,
    "axes.edgecolor": "#4a5258",
    "axes.linewidth": 0.7,
    "axes.labelcolor": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#e4e7e9",
    "grid.linewidth": 0.5,
    "xtick.color": "#4a5258",
    "ytick.color": "#4a5258",
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "lines.linewidth": 1.3,
    "hatch.linewidth": 0.6,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "svg.hashsalt": "downcore-report",
    "svg.fonttype": "none",
    "path.simplify": True,
    "figure.autolayout": False,
    "figure.constrained_layout.use": False,
}

#: PNG resolution [dots per inch]
PNG_DPI = 120

#: resolution of the rasterised parts inside an SVG [dots per inch]
RASTER_DPI = 100

#: an artist with more vertices than this is rasterised inside the SVG
DENSE_VERTICES = 600

#: a collection of more than this many separate paths (error bars, markers) is rasterised too
MANY_PATHS = 100


@contextlib.contextmanager
def report_style() -> Iterator[None]:
    """Matplotlib settings of the report, restored afterwards."""
    with matplotlib.rc_context(_RC):
        yield


def new_figure(width_in: float = 7.2, height_in: float = 3.4, **subplot_kw) -> tuple[Figure, object]:
    """A figure (not registered with pyplot's global state) and its axes."""
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    axes = fig.subplots(**subplot_kw)
    return fig, axes


def age_axis(ax, label: str = "age [cal BP]") -> None:
    """Age axis with older ages to the left (time runs left to right)."""
    ax.set_xlabel(label)
    if not ax.xaxis_inverted():
        ax.invert_xaxis()


class _PlainLogFormatter(LogFormatter):
    """Tick labels of a logarithmic axis as plain numbers (``6``, ``10``, ``20``), not powers
    of ten: easier to read over the two or three decades a report axis spans, and plain text
    (no math layout) in the SVG."""

    def _num_to_string(self, x, vmin, vmax):
        return f"{x:g}"


def plain_log_labels(axis) -> None:
    """Label a logarithmic ``axis`` (``ax.xaxis`` or ``ax.yaxis``) with plain numbers."""
    axis.set_major_formatter(_PlainLogFormatter())
    axis.set_minor_formatter(_PlainLogFormatter(labelOnlyBase=False))


@dataclass(frozen=True)
class SavedFigure:
    """A figure written to disk: its key, caption, files (relative to the run) and SVG text."""

    key: str
    title: str
    caption: str
    png: str | None
    svg: str
    svg_text: str


def _png_bytes(fig: Figure) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=PNG_DPI, metadata={"Software": None})
    return buffer.getvalue()


_PATH_DATA = re.compile(r'(?<=\sd=")[^"]*')
_DECIMALS = re.compile(r"(\d+\.\d{2})\d+")


def _compact_path(match: re.Match) -> str:
    """Path data with coordinates to 0.01 pt (1/7200 inch) and one line per path."""
    return _DECIMALS.sub(r"\1", match.group(0)).replace(" \n", " ").replace("\n", " ")


def _svg_text(fig: Figure) -> str:
    buffer = io.StringIO()
    fig.savefig(buffer, format="svg", dpi=RASTER_DPI,
                metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    return _PATH_DATA.sub(_compact_path, buffer.getvalue())


def _vertex_count(artist) -> int:
    if hasattr(artist, "get_xydata"):
        return len(artist.get_xydata())
    if hasattr(artist, "get_paths"):
        return sum(len(path.vertices) for path in artist.get_paths())
    return 0


def rasterise_dense(fig: Figure, limit: int = DENSE_VERTICES) -> int:
    """Mark every line or collection of ``fig`` holding more than ``limit`` vertices or more
    than :data:`MANY_PATHS` separate paths for rasterising inside vector output (thin
    ensemble lines are marked when drawn, see :func:`ensemble_lines`); return how many were
    marked."""
    marked = 0
    for ax in fig.axes:
        for artist in [*ax.lines, *ax.collections]:
            many_paths = len(getattr(artist, "get_paths", list)()) > MANY_PATHS
            if not artist.get_rasterized() and (many_paths or _vertex_count(artist) > limit):
                artist.set_rasterized(True)
                marked += 1
    return marked


def ensemble_lines(ax, x, y, **style_kw) -> None:
    """Draw each column of ``x`` (or ``y``) as a thin line, rasterised in vector output
    (many members are one picture, not thousands of separate paths)."""
    for line in ax.plot(x, y, **style_kw):
        line.set_rasterized(True)


def save_figure(fig: Figure, run_dir: pathlib.Path, key: str, title: str,
                caption: str, png: bool = False) -> SavedFigure:
    """Write ``figures/<key>.svg`` (and ``figures/<key>.png`` when ``png``) atomically and
    close the figure.

    Parameters
    ----------
    fig : Figure
        The figure (drawn under :func:`report_style`).
    run_dir : Path
        The run folder.
    key : str
        File stem, unique in the run (letters, digits, ``-``, ``_``).
    title, caption : str
        Shown above and below the figure in the report.
    png : bool
        Also write a PNG copy (a second drawing, at :data:`PNG_DPI`).
    """
    safe = re.sub(r"[^A-Za-z0-9_.-]+", "_", key)
    rasterise_dense(fig)
    if place_panels(fig):
        # the panels are placed: no layout engine, so saving draws the figure once (with one,
        # Matplotlib draws it a first time to lay it out)
        fig.set_layout_engine(None)
    svg = _svg_text(fig)
    png_name = None
    if png:
        # the layout is settled by the first save; freezing it saves a second layout pass
        # and keeps the PNG identical in layout to the SVG
        fig.set_layout_engine(None)
        png_name = f"figures/{safe}.png"
        atomic_write_bytes(run_dir / png_name, _png_bytes(fig))
    atomic_write_bytes(run_dir / "figures" / f"{safe}.svg", svg.encode("utf-8"))
    return SavedFigure(safe, title, caption, png_name, f"figures/{safe}.svg", svg)


#: a picture embedded in an SVG (a rasterised part of a figure): data, not an address
EMBEDDED_PICTURE = re.compile(r"data:image/png;base64,[A-Za-z0-9+/=\s]+")


def without_embedded_pictures(text: str) -> str:
    """``text`` with the payload of every embedded picture removed (its base64 letters can
    spell anything, ``//`` included), for checks that the page refers to no address."""
    return EMBEDDED_PICTURE.sub("data:image/png;base64,", text)


_PROLOGUE = re.compile(r"^.*?(?=<svg\b)", re.S)
_NAMESPACES = re.compile(r'\s+xmlns(?::\w+)?="[^"]*"')
_COMMENT = re.compile(r"<!--.*?-->", re.S)
_ID = re.compile(r'\bid="([^"]+)"')


def inline_svg(svg_text: str, prefix: str) -> str:
    """Turn a standalone SVG file into an element for inline use in an HTML page.

    The XML prologue, document type, namespace declarations (HTML parsers put ``<svg>`` in
    the SVG namespace themselves) and comments are removed, so the page holds no address of
    any kind; every ``id`` gets ``prefix`` so that figures on one page cannot clash, and the
    fixed ``width``/``height`` give way to CSS scaling (the ``viewBox`` keeps the aspect).
    """
    text = _PROLOGUE.sub("", svg_text, count=1)
    text = _COMMENT.sub("", text)
    head_end = text.index(">")
    head = _NAMESPACES.sub("", text[:head_end])
    head = re.sub(r'\s(width|height)="[^"]*"', "", head)
    head += ' role="img" class="plot"'
    text = head + text[head_end:]
    ids = sorted(set(_ID.findall(text)), key=len, reverse=True)
    if ids:
        pattern = re.compile(r'(\bid="|#)(' + "|".join(re.escape(i) for i in ids) + r')(?=["\)])')
        text = pattern.sub(lambda m: f"{m.group(1)}{prefix}-{m.group(2)}", text)
    text = text.replace("xlink:href=", "href=")
    return text.strip()
