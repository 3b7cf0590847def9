"""The report figures' own layout (pipelines.report.layout): every panel placed, no text cut
off at the figure's edge, no panel's decorations over another panel, and the figure drawn
only once when saved. Uses the synthetic run folder of ``run_folder_factory``."""

from __future__ import annotations

import io

import pytest
from matplotlib.backends.backend_svg import RendererSVG
from matplotlib.figure import Figure

from pipelines.report import build, style
from pipelines.report.layout import place_panels
from pipelines.report.rundata import read_run
from run_folder_factory import make_run_folder


class _Collecting:
    """Stands in for the report's figure list: keeps every figure the run's tables allow."""

    def __init__(self):
        self.figures = {}

    def add(self, make, key, title, caption):
        fig = make()
        if fig is not None:
            self.figures[key] = fig
        return ""


def _svg_renderer(fig):
    """Draw ``fig`` as the SVG backend does (at 72 dpi) and return the renderer."""
    fig.dpi = 72
    width, height = fig.get_size_inches() * 72
    renderer = RendererSVG(width, height, io.StringIO(), image_dpi=72)
    fig.draw(renderer)
    return renderer


@pytest.fixture(scope="module")
def figures(tmp_path_factory):
    run = read_run(make_run_folder(tmp_path_factory.mktemp("run") / "run-l"))
    collected = _Collecting()
    with style.report_style():
        build._sections(run, collected)
        yield collected.figures


def test_every_report_figure_is_placed_with_its_text_inside(figures):
    assert len(figures) > 8
    for key, fig in figures.items():
        assert place_panels(fig), key
        fig.set_layout_engine(None)
        renderer = _svg_renderer(fig)  # text measured as in the SVG files
        page = fig.bbox
        panels = [ax.get_tightbbox(renderer) for ax in fig.axes]  # the tick labels drawn, titles...
        around = [t.get_window_extent(renderer) for t in (fig._suptitle, *fig.legends) if t is not None]
        for box in panels + around:
            assert page.x0 - 1 <= box.x0 and box.x1 <= page.x1 + 1, (key, box)
            assert page.y0 - 1 <= box.y0 and box.y1 <= page.y1 + 1, (key, box)
        for i, a in enumerate(panels):  # decorations of one panel stay off the others' plots
            for j, ax in enumerate(fig.axes):
                if i != j:
                    inner = ax.get_window_extent(renderer)
                    overlap_w = min(a.x1, inner.x1) - max(a.x0, inner.x0)
                    overlap_h = min(a.y1, inner.y1) - max(a.y0, inner.y0)
                    assert not (overlap_w > 2 and overlap_h > 2), (key, i, j)


def test_a_placed_figure_is_drawn_once_when_saved(tmp_path, figures, monkeypatch):
    """Constrained layout draws a figure a first time to lay it out; placed panels need not."""
    draws = []
    original = Figure.draw
    monkeypatch.setattr(Figure, "draw", lambda self, renderer: draws.append(1) or original(self, renderer))
    key, fig = next(iter(figures.items()))
    fig.set_layout_engine("constrained")
    with style.report_style():
        style.save_figure(fig, tmp_path, key, "t", "c")
    assert len(draws) == 1


def test_a_figure_outside_one_grid_is_left_to_constrained_layout():
    fig = Figure(figsize=(4, 3), layout="constrained")
    fig.add_axes((0.1, 0.1, 0.8, 0.8))
    assert not place_panels(fig)
