"""The report's drawing shortcuts against matplotlib's own results.

- :mod:`roamstat.report.agg_text` stamps cached text bitmaps: each string must land where
  matplotlib's own Agg renderer draws it (same ink box within a pixel, same amount of ink), also
  turned 90 degrees, and measure the same.
- :mod:`roamstat.report.key` draws the figure's key in the page: its entries must be the labels
  ``ax.get_legend_handles_labels()`` returns, in the colours matplotlib reports for the artists
  (``matplotlib.colors.to_hex``).
- :func:`roamstat.report.figures.dots`, :func:`roamstat.report.figures.stairs` and the state
  figure's box plots draw what ``Axes.scatter``, ``Axes.stairs`` and ``Axes.boxplot`` draw (the
  same pixels but for edge anti-aliasing; stairs with the same autoscaled limits).
- :func:`roamstat.report.curves.null_panels` labels each null's x axis by what its curve is
  indexed by (a time-indexed null must not be drawn on a step axis).
"""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import to_hex
from matplotlib.figure import Figure

from roamstat.report import curves, figures
from roamstat.report import agg_text
from roamstat.report.agg_text import TextStampCanvas
from roamstat.report.html import figure as figure_html
from roamstat.report.key import key_html, key_of
from roamstat.report.states_figures import PALETTE, _boxes

TEXTS = [("east (km, masked: relative to a hidden origin)", 0), ("NSD (km²)", 90), ("10⁵", 0), ("0.0025", 0),
         ("state 1 (152)", 90)]


def _ink(canvas_class, text: str, angle: float) -> np.ndarray:
    fig = Figure(figsize=(6.0, 6.0), dpi=80)
    canvas_class(fig)
    fig.text(0.3, 0.4, text, rotation=angle, fontsize=8)
    fig.canvas.draw()
    return 255 - np.asarray(fig.canvas.buffer_rgba())[..., 0].astype(int)  # black text on white: ink


def test_the_report_stamps_text_here_and_falls_back_to_plain_agg_when_the_check_fails(monkeypatch):
    # The per-process check: on this matplotlib the stamps match its own drawing, so they are used ...
    agg_text.canvas_class.cache_clear()
    assert agg_text.canvas_class() is TextStampCanvas
    assert isinstance(figures._new((2.0, 2.0))[0].canvas, TextStampCanvas)
    # ... and when the internals they use are gone (another matplotlib), figures use plain Agg.
    agg_text.canvas_class.cache_clear()
    monkeypatch.delattr(type(agg_text.fontManager), "_find_fonts_by_props")
    agg_text._font_files.cache_clear()
    try:
        assert agg_text.canvas_class() is FigureCanvasAgg
    finally:
        agg_text.canvas_class.cache_clear()


@pytest.mark.parametrize("text, angle", TEXTS)
def test_stamped_text_lands_where_matplotlib_draws_it(text, angle):
    ours, reference = _ink(TextStampCanvas, text, angle), _ink(FigureCanvasAgg, text, angle)
    boxes = []
    for ink in (ours, reference):
        rows, cols = np.nonzero(ink > 60)
        boxes.append(np.array([rows.min(), rows.max(), cols.min(), cols.max()]))
    assert np.abs(boxes[0] - boxes[1]).max() <= 1, (boxes, text, angle)
    assert ours.sum() == pytest.approx(reference.sum(), rel=0.05)


def test_stamped_text_measures_as_matplotlib_does():
    sizes = []
    for canvas_class in (TextStampCanvas, FigureCanvasAgg):
        fig = Figure(figsize=(4.0, 3.0), dpi=80)
        canvas_class(fig)
        label = fig.text(0.1, 0.5, "days since the first fix", fontsize=8)
        sizes.append(label.get_window_extent(fig.canvas.get_renderer()).size)
    assert sizes[0] == pytest.approx(sizes[1], abs=0.01)


def test_key_reads_the_legend_entries_and_their_colours():
    fig = Figure()
    ax = fig.subplots()
    ax.plot([0, 1], [0, 1], color="#1f5fa8", label="observed")
    ax.plot([0, 1], [1, 0], color="#555555", linestyle="--", label="null mean")
    ax.scatter([0.5], [0.5], color="#c62828", gid="square", label="end")
    ax.fill([0, 1, 1], [0, 0, 1], color="#d9d9d9", label="null envelope")
    ax.plot([0, 1], [0.5, 0.5], "D", color="black", label="stationary")
    ax.plot([0, 1], [0.2, 0.2], color="#0072B2", alpha=0.5, label="faint")
    entries = key_of(ax)
    handles, labels = ax.get_legend_handles_labels()
    assert [e.label for e in entries] == labels
    assert [e.mark for e in entries] == ["line", "dashed", "square", "area", "diamond", "line"]
    expected = [to_hex(handles[0].get_color()), to_hex(handles[1].get_color()),
                to_hex(handles[2].get_facecolor()[0]), to_hex(handles[3].get_facecolor()),
                to_hex(handles[4].get_color())]
    assert [e.colour for e in entries[:5]] == expected
    # A translucent colour is shown as it looks over the white page: 50 % of #0072B2 on white.
    assert entries[5].colour == to_hex(((0x00 + 255) / 2 / 255, (0x72 + 255) / 2 / 255, (0xB2 + 255) / 2 / 255))


def test_figure_html_carries_the_key_and_says_it_in_the_alt_text():
    fig = Figure()
    ax = fig.subplots()
    ax.plot([0, 1], [0, 1], color="black", label="observed <1>")
    html = figure_html("figures/a-nsd.png", "Caption.", key_of(ax))
    assert '<ul class="key">' in html and "observed &lt;1&gt;" in html and 'stroke="#000000"' in html
    assert 'alt="Caption. Key: observed &lt;1&gt; (line)."' in html
    assert key_html(()) == "" and "<ul" not in figure_html("x.png", "Caption.")


def test_null_panels_label_each_x_axis_by_its_index():
    steps = {"step": np.arange(5.0), "observed_m2": np.arange(5.0) ** 2, "lo_m2": np.zeros(5), "hi_m2": np.full(5, 30.0)}
    timed = {"t_s": np.arange(5.0) * 86400.0, "observed_m2": np.arange(5.0) ** 2}
    panels = curves.null_panels({"crw": steps, "ctcrw": timed})
    assert [p["x_label"] for p in panels] == ["steps since the first fix", "days since the first fix"]
    assert panels[1]["x"].tolist() == [0.0, 1.0, 2.0, 3.0, 4.0]
    picture = figures.nsd_envelopes(panels)
    assert picture.png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, section 5.2)
    assert [e.label for e in picture.key] == ["null envelope", "observed"]


def _pixels(draw, limits: bool = True) -> np.ndarray:
    """RGB pixels of one 80-dpi axes on which ``draw(ax)`` drew, with fixed limits or autoscaled."""
    fig = Figure(figsize=(4.0, 3.0), dpi=80)
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.1, 0.1, 0.85, 0.85))
    draw(ax)
    if limits:
        ax.set_xlim(0.0, 4.0)
        ax.set_ylim(-1.0, 12.0)
    fig.canvas.draw()
    return np.asarray(fig.canvas.buffer_rgba())[..., :3].astype(int)


def _same_picture(ours: np.ndarray, reference: np.ndarray) -> None:
    # Anti-aliased edges differ where a Line2D's markers are snapped to whole pixels and a
    # collection's are not (up to ~5 % of the ink for many large overlapping triangles); anything
    # drawn differently moves whole marks. At most 0.5 % of the pixels may differ strongly and the
    # ink by 8 % (judgement, no source).
    strong = (np.abs(ours - reference).max(axis=2) > 60).mean()
    ink = np.abs(ours - 255).sum() / np.abs(reference - 255).sum()
    assert 0.0 <= strong < 0.005 and 0.92 < ink < 1.08


def test_dots_draw_what_scatter_draws():
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0.2, 3.8, 60), rng.uniform(0.0, 11.0, 60)
    for s, marker, style, scatter_style in [(4, "o", {}, {}), (90, "^", {"markeredgecolor": "white"},
                                                                {"edgecolors": "white"}),
                                            (16, "x", {"alpha": 0.6, "markeredgewidth": 0.9},
                                             {"alpha": 0.6, "linewidths": 0.9})]:
        ours = _pixels(lambda ax, s=s, marker=marker, style=style: figures.dots(ax, x, y, s, "#1f5fa8", marker, **style))
        reference = _pixels(lambda ax, s=s, marker=marker, style=scatter_style: ax.scatter(
            x, y, s=s, marker=marker, color="#1f5fa8", **style))
        _same_picture(ours, reference)
    # A different marker size is a different picture: the comparison can fail.
    with pytest.raises(AssertionError):
        _same_picture(_pixels(lambda ax: figures.dots(ax, x, y, 40, "#1f5fa8")),
                      _pixels(lambda ax: ax.scatter(x, y, s=4, color="#1f5fa8")))


def test_state_box_plots_draw_what_boxplot_draws():
    rng = np.random.default_rng(4)
    # Skewed dwell times with outliers, a tight one and a state without runs (drawn as nothing).
    samples = [rng.gamma(1.5, 2.0, 80), np.r_[rng.normal(6.0, 0.5, 40), 11.5], np.array([np.nan])]
    states = np.array([1, 2, 3])

    def reference(ax):
        box = ax.boxplot(samples, positions=states, widths=0.5, patch_artist=True, showfliers=True)
        for patch, k in zip(box["boxes"], states):
            patch.set_facecolor(PALETTE[k - 1])
            patch.set_alpha(0.6)
        ax.set_xticks(states, [f"state {k}" for k in states])  # as the figure labels them

    def ours(ax, width=0.5):
        _boxes(ax, samples, states, width)
        ax.set_xticks(states, [f"state {k}" for k in states])

    _same_picture(_pixels(ours), _pixels(reference))
    with pytest.raises(AssertionError):  # narrower boxes are a different picture: the comparison can fail
        _same_picture(_pixels(lambda ax: ours(ax, 0.3)), _pixels(reference))


def test_stairs_draw_and_autoscale_as_axes_stairs():
    rng = np.random.default_rng(5)
    heights, edges = np.histogram(rng.gamma(2.0, 50.0, 400), bins=30, density=True)
    for fill, style in [(True, {"label": "observed", "alpha": 0.3}), (False, {"linewidth": 0.8})]:
        ours = _pixels(lambda ax, fill=fill, style=style: figures.stairs(ax, heights, edges, "#8ea2bb", fill, **style),
                       limits=False)
        reference = _pixels(lambda ax, fill=fill, style=style: ax.stairs(heights, edges, color="#8ea2bb", fill=fill,
                                                                         **style), limits=False)
        _same_picture(ours, reference)
        fig = Figure()
        mine, theirs = fig.add_subplot(121), fig.add_subplot(122)
        figures.stairs(mine, heights, edges, "#8ea2bb", fill, **style)
        theirs.stairs(heights, edges, color="#8ea2bb", fill=fill, **style)
        # same limits: the value axis starts at the baseline 0 (sticky), the edges get the margins
        np.testing.assert_allclose([*mine.get_xlim(), *mine.get_ylim()], [*theirs.get_xlim(), *theirs.get_ylim()])
        assert mine.get_ylim()[0] == 0.0
    with pytest.raises(AssertionError):  # the bins in reverse are a different picture: the comparison can fail
        _same_picture(_pixels(lambda ax: figures.stairs(ax, heights[::-1], edges, "#8ea2bb", True), limits=False),
                      _pixels(lambda ax: ax.stairs(heights, edges, color="#8ea2bb", fill=True), limits=False))
