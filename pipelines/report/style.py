"""The report's look: palette, line styles, Matplotlib settings and deterministic saving.

Our own palette, chosen to survive grey-scale printing: series are told apart by lightness,
line style and marker as well as by hue. Every figure is drawn with the Agg backend (no
display) and saved as PNG and SVG with the dates and software stamps removed and a fixed
SVG hash salt, so that a rerun gives byte-identical files.
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

import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from pipelines.runfolder import atomic_write_bytes  # noqa: E402

__all__ = ["INK", "SLATE", "SAND", "CLAY", "MOSS", "FOG", "PAPER", "BAND_DARK", "BAND_LIGHT",
           "WARM", "COOL", "SERIES_STYLES", "report_style", "new_figure", "SavedFigure",
           "save_figure", "inline_svg", "age_axis"]

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
    "svg.fonttype": "path",
    "path.simplify": True,
}

#: PNG resolution [dots per inch]
PNG_DPI = 120


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


@dataclass(frozen=True)
class SavedFigure:
    """A figure written to disk: its key, caption, files (relative to the run) and SVG text."""

    key: str
    title: str
    caption: str
    png: str
    svg: str
    svg_text: str


def _png_bytes(fig: Figure) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=PNG_DPI, metadata={"Software": None})
    return buffer.getvalue()


def _svg_text(fig: Figure) -> str:
    buffer = io.StringIO()
    fig.savefig(buffer, format="svg",
                metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    return buffer.getvalue()


def save_figure(fig: Figure, run_dir: pathlib.Path, key: str, title: str,
                caption: str) -> SavedFigure:
    """Write ``figures/<key>.png`` and ``figures/<key>.svg`` atomically and close the figure.

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
    """
    safe = re.sub(r"[^A-Za-z0-9_.-]+", "_", key)
    png = _png_bytes(fig)
    # the layout is settled by the first save; freezing it saves a second constrained-layout
    # pass (the slowest part of drawing) and keeps the SVG identical in layout to the PNG
    fig.set_layout_engine("none")
    svg = _svg_text(fig)
    plt.close(fig)
    atomic_write_bytes(run_dir / "figures" / f"{safe}.png", png)
    atomic_write_bytes(run_dir / "figures" / f"{safe}.svg", svg.encode("utf-8"))
    return SavedFigure(safe, title, caption, f"figures/{safe}.png", f"figures/{safe}.svg", svg)


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
    head += f' role="img" class="plot"'
    text = head + text[head_end:]
    ids = sorted(set(_ID.findall(text)), key=len, reverse=True)
    if ids:
        pattern = re.compile(r'(\bid="|#)(' + "|".join(re.escape(i) for i in ids) + r')(?=["\)])')
        text = pattern.sub(lambda m: f"{m.group(1)}{prefix}-{m.group(2)}", text)
    text = text.replace("xlink:href=", "href=")
    return text.strip()
