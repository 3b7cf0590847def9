"""A light layout for the report's figures: margins from the text they must hold, no drawing.

Matplotlib's constrained layout needs a figure drawn once before it is saved (a dry run that
lays out every tick, label and artist, and each shared axis's siblings), which doubled the
time a report figure takes. The report's figures are simple grids of panels (one GridSpec,
titles on the left, legends inside the panels or below the figure), so their layout follows
from a few widths and heights: each panel's tick labels (the strings its locator and
formatter give, measured with the font as the SVG output measures it), axis labels and
title, the figure's title and a legend below the figure. :func:`place_panels` computes them
and places the panels, with constrained layout's padding, before the single drawing that
writes the file. A figure that is not such a grid (colour bars, sub-figures, panels outside a
grid) is left to constrained layout (:func:`place_panels` returns False).
"""

from __future__ import annotations

import functools
import math

import numpy as np
from matplotlib.font_manager import FontProperties
from matplotlib.textpath import text_to_path
from matplotlib.transforms import Bbox

__all__ = ["place_panels", "PAD_IN", "GAP_IN"]

#: padding around the figure [inch] (constrained layout's default, 3 pt)
PAD_IN = 3 / 72

#: room between a panel's decorations and the next panel's [inch] (constrained layout's
#: padding on both sides)
GAP_IN = 6 / 72


def place_panels(fig) -> bool:
    """Place the panels of ``fig`` from their decorations' sizes; False (nothing changed)
    when ``fig`` is not one grid of panels or its decorations leave no room."""
    grid = _single_grid(fig)
    if grid is None:
        return False
    for _ in range(2):  # the second pass sees the ticks of the panels' final sizes
        boxes = _panel_boxes(fig, grid)
        if boxes is None:
            return False
        for ax, box in boxes.items():
            ax._set_position(box)
    return True


def _single_grid(fig):
    """The one GridSpec every panel of ``fig`` sits in, or None."""
    if fig.subfigs or not fig.axes:
        return None
    grids = set()
    for ax in fig.axes:
        spec = ax.get_subplotspec()
        if spec is None:
            return None
        grids.add(spec.get_gridspec())
    return grids.pop() if len(grids) == 1 else None


@functools.lru_cache(maxsize=4096)
def _metrics_pt(string: str, font: FontProperties, ismath) -> tuple[float, float]:
    """Width and height [pt] of one string in ``font`` (as the SVG backend measures text)."""
    width, height, _ = text_to_path.get_text_width_height_descent(string, font, ismath)
    return width, height


def _text_size_in(text_artist, string: str) -> tuple[float, float]:
    """Width and height [inch] of ``string`` drawn with ``text_artist``'s font and rotation
    (a line is as tall as "lp", as Matplotlib lays text out)."""
    if not string:
        return 0.0, 0.0
    font = text_artist.get_fontproperties()
    string, ismath = text_artist._preprocess_math(string)
    lines = string.split("\n") if not ismath else [string]
    line_height = _metrics_pt("lp", font, False)[1]
    sizes = [_metrics_pt(line, font, ismath) for line in lines]
    width = max(w for w, _ in sizes)
    height = max(max(h for _, h in sizes), line_height)
    if len(lines) > 1:
        height += (len(lines) - 1) * line_height * text_artist.get_linespacing()
    angle = math.radians(text_artist.get_rotation())
    w = abs(width * math.cos(angle)) + abs(height * math.sin(angle))
    h = abs(width * math.sin(angle)) + abs(height * math.cos(angle))
    return w / 72, h / 72


def _tick_labels(axis, shown: bool) -> list[tuple[float, str]]:
    """(position as a fraction of the axis, label) of the tick labels ``axis`` will draw."""
    if not shown:
        return []
    low, high = sorted(axis.get_view_interval())
    scale = axis.get_transform()
    ends = scale.transform(np.array([low, high], dtype=float))
    span = ends[1] - ends[0]
    if not np.all(np.isfinite(ends)) or span == 0:
        return []
    slack = 1e-9 * abs(high - low)
    labels = []
    for locator, formatter in ((axis.get_major_locator(), axis.get_major_formatter()),
                               (axis.get_minor_locator(), axis.get_minor_formatter())):
        locs = [float(v) for v in np.asarray(locator(), dtype=float) if low - slack <= v <= high + slack]
        if not locs:
            continue
        where = (scale.transform(np.array(locs)) - ends[0]) / span
        for fraction, label in zip(where, formatter.format_ticks(locs)):
            if label:
                labels.append((1.0 - fraction if axis.get_inverted() else float(fraction), label))
    return labels


def _axis_label_in(axis, horizontal: bool) -> float:
    """Room taken by ``axis``'s label beyond its tick labels [inch]."""
    label = axis.label
    if not label.get_visible() or not label.get_text():
        return 0.0
    width, height = _text_size_in(label, label.get_text())
    return (height if horizontal else width) + axis.labelpad / 72


def _sized_labels(axis, shown: bool) -> list[tuple[float, float, float]]:
    """(fraction, width, height [inch]) of every tick label ``axis`` will draw."""
    text = axis.majorTicks[0].label1
    return [(f, *_text_size_in(text, s)) for f, s in _tick_labels(axis, shown)]


def _panel_room(ax, width_in: float, height_in: float) -> dict[str, float]:
    """The room [inch] ``ax`` needs on each side of its ``width_in`` x ``height_in`` panel."""
    room = {"left": 0.0, "right": 0.0, "top": 0.0, "bottom": 0.0}
    x_labels = _sized_labels(ax.xaxis, ax.xaxis.get_tick_params().get("labelbottom", True))
    room["bottom"] = ax.xaxis.majorTicks[0].get_tick_padding() / 72  # the ticks, labelled or not
    if x_labels:
        room["bottom"] += ax.xaxis.majorTicks[0].get_pad() / 72 + max(h for _, _, h in x_labels)
        room["right"] = max(0.0, max(f * width_in + w / 2 - width_in for f, w, _ in x_labels))
        room["left"] = max(0.0, max(w / 2 - f * width_in for f, w, _ in x_labels))
    room["bottom"] += _axis_label_in(ax.xaxis, horizontal=True)
    y_labels = _sized_labels(ax.yaxis, ax.yaxis.get_tick_params().get("labelleft", True))
    y_room = _axis_label_in(ax.yaxis, horizontal=False) + ax.yaxis.majorTicks[0].get_tick_padding() / 72
    if y_labels:
        y_room += ax.yaxis.majorTicks[0].get_pad() / 72 + max(w for _, w, _ in y_labels)
        room["top"] = max(0.0, max(f * height_in + h / 2 - height_in for f, _, h in y_labels))
    room["left"] = max(room["left"], y_room)
    title_pad = ax.titleOffsetTrans.get_matrix()[1, 2] / ax.figure.dpi
    for title in (ax.title, ax._left_title, ax._right_title):
        if title.get_visible() and title.get_text():
            room["top"] = max(room["top"], _text_size_in(title, title.get_text())[1] + title_pad)
    return room


def _legend_height_in(legend) -> float:
    """Height [inch] of a figure legend with its padding (rows of handles and labels)."""
    size = legend.prop.get_size_in_points()
    texts = legend.get_texts()
    rows = math.ceil(len(texts) / max(1, legend._ncols)) if texts else 0
    line = max([_text_size_in(t, t.get_text())[1] * 72 for t in texts] + [legend.handleheight * size])
    height = rows * line + max(0, rows - 1) * legend.labelspacing * size
    return (height + 2 * legend.borderpad * size + 2 * legend.borderaxespad * size) / 72


def _figure_room(fig) -> tuple[float, float]:
    """Room [inch] above the panels (the figure's title) and below them (a figure legend)."""
    top = bottom = 0.0
    suptitle = fig._suptitle
    if suptitle is not None and suptitle.get_visible() and suptitle.get_text():
        top = _text_size_in(suptitle, suptitle.get_text())[1] + PAD_IN
    for legend in fig.legends:
        if legend.get_visible():
            if getattr(legend, "_outside_loc", None) != "lower":
                return math.nan, math.nan  # a legend elsewhere: not laid out here
            bottom = max(bottom, _legend_height_in(legend))
    return top, bottom


def _panel_boxes(fig, grid) -> dict | None:
    """Each panel's box (figure fraction) for the rooms measured at the current sizes."""
    width_in, height_in = fig.get_size_inches()
    nrows, ncols = grid.get_geometry()
    left, right = np.zeros(ncols), np.zeros(ncols)
    top, bottom = np.zeros(nrows), np.zeros(nrows)
    for ax in fig.axes:
        spec = ax.get_subplotspec()
        box = ax.get_position()
        room = _panel_room(ax, box.width * width_in, box.height * height_in)
        c0, c1, r0, r1 = spec.colspan.start, spec.colspan.stop - 1, spec.rowspan.start, spec.rowspan.stop - 1
        left[c0], right[c1] = max(left[c0], room["left"]), max(right[c1], room["right"])
        top[r0], bottom[r1] = max(top[r0], room["top"]), max(bottom[r1], room["bottom"])
    fig_top, fig_bottom = _figure_room(fig)
    widths = np.asarray(grid.get_width_ratios() or [1] * ncols, dtype=float)
    heights = np.asarray(grid.get_height_ratios() or [1] * nrows, dtype=float)
    free_w = width_in - 2 * PAD_IN - left.sum() - right.sum() - GAP_IN * (ncols - 1)
    free_h = height_in - 2 * PAD_IN - fig_top - fig_bottom - top.sum() - bottom.sum() - GAP_IN * (nrows - 1)
    if not (free_w > 0 and free_h > 0):
        return None
    cell_w, cell_h = free_w * widths / widths.sum(), free_h * heights / heights.sum()
    x0 = PAD_IN + left + np.concatenate([[0.0], np.cumsum(left + cell_w + right + GAP_IN)[:-1]])
    y1 = height_in - PAD_IN - fig_top - top - np.concatenate([[0.0], np.cumsum(top + cell_h + bottom + GAP_IN)[:-1]])
    boxes = {}
    for ax in fig.axes:
        spec = ax.get_subplotspec()
        c0, c1, r0, r1 = spec.colspan.start, spec.colspan.stop - 1, spec.rowspan.start, spec.rowspan.stop - 1
        boxes[ax] = Bbox.from_extents(x0[c0] / width_in, (y1[r1] - cell_h[r1]) / height_in,
                                      (x0[c1] + cell_w[c1]) / width_in, y1[r0] / height_in)
    return boxes
