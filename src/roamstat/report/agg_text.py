"""An Agg canvas that renders each distinct text once per process and stamps the bitmap after.

The report draws the same strings again and again: axis labels, tick labels such as "0" or "10²",
panel titles.  The Agg renderer lays out and rasterises every glyph of every text on every draw;
with the glyph-by-glyph text path of recent matplotlib that was about a third of the report's
drawing time (profiled on the sample deployment).  :class:`TextStampCanvas` keeps, per process,
the grey-level bitmap of each (string, font, size, dpi, antialiasing) drawn by FreeType through the
font's own ``set_text``/``draw_glyphs_to_bitmap`` (the whole-string path matplotlib used up to
3.10) and stamps it with Agg's ``draw_text_image``, which also rotates it (vertical axis labels).
Mathtext and TeX strings take matplotlib's own path.

Text sizes (matplotlib keeps them per renderer, i.e. per figure) and the font's vertical metrics
(read from its tables for every text on every draw) are kept per process too.

The stamps use matplotlib internals (written against matplotlib 3.11).  :func:`canvas_class`
checks once per process that stamped text lands where matplotlib's own renderer puts it, and
falls back to the plain Agg canvas when it does not, or when the internals are missing: another
matplotlib version costs speed, never a wrong figure.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg, RendererAgg, get_hinting_flag
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties, fontManager, get_font

#: Distinct texts kept per process; tick labels of a thousand animals repeat, so few distinct ones.
STAMPS_KEPT = 4096


@lru_cache(maxsize=STAMPS_KEPT)
def _stamp(text: str, font_key, size_pt: float, dpi: float, antialiased: bool):
    """(grey bitmap, x offset px, y offset px, descent px) of ``text`` drawn unrotated."""
    font = get_font(font_key)
    font.clear()
    font.set_size(size_pt, dpi)
    font.set_text(text, 0.0, flags=get_hinting_flag())
    font.draw_glyphs_to_bitmap(antialiased=antialiased)
    x_off, y_off = font.get_bitmap_offset()
    bitmap = np.array(font.get_image(), dtype=np.uint8)  # a copy: the font's buffer is reused
    return bitmap, x_off / 64.0, y_off / 64.0, font.get_descent() / 64.0


@lru_cache(maxsize=STAMPS_KEPT)
def _extent(text: str, font_key, size_pt: float, dpi: float):
    """(width, height, descent) in pixels of ``text`` unrotated, as RendererAgg measures plain text."""
    font = get_font(font_key)
    font.clear()
    font.set_size(size_pt, dpi)
    font.set_text(text, 0.0, flags=get_hinting_flag())
    width, height = font.get_width_height()
    return width / 64.0, height / 64.0, font.get_descent() / 64.0


@lru_cache(maxsize=256)
def _height_metrics(font_key, size_pt: float, dpi: float):
    """(ascent, descent, line gap) in pixels from the font's OS/2 or hhea table, as Text measures them."""
    font = get_font(font_key)
    head = font.get_sfnt_table("head")
    if head is None:
        return None, None, None  # Text then measures the font itself
    scale = size_pt * dpi / 72.0 / head["unitsPerEm"]
    os2 = font.get_sfnt_table("OS/2")
    if os2 is not None:
        return os2["sTypoAscender"] * scale, -os2["sTypoDescender"] * scale, os2["sTypoLineGap"] * scale
    hhea = font.get_sfnt_table("hhea")
    if hhea is not None:
        return hhea["ascent"] * scale, -hhea["descent"] * scale, hhea["lineGap"] * scale
    return None, None, None


def _font_key(prop) -> tuple:
    """The font files of ``prop`` (size aside): matplotlib's lookup re-reads its settings on every call."""
    return _font_files(tuple(prop.get_family()), prop.get_style(), prop.get_variant(), prop.get_weight(),
                       prop.get_stretch(), prop.get_file())


@lru_cache(maxsize=64)
def _font_files(family, style, variant, weight, stretch, file) -> tuple:
    prop = FontProperties(family=list(family), style=style, variant=variant, weight=weight, stretch=stretch, fname=file)
    return tuple(fontManager._find_fonts_by_props(prop))


class TextStampRenderer(RendererAgg):
    """:class:`RendererAgg` drawing plain text from :func:`_stamp`'s per-process bitmaps."""

    def draw_text(self, gc, x, y, s, prop, angle, ismath=False, mtext=None):
        if ismath:
            return super().draw_text(gc, x, y, s, prop, angle, ismath, mtext)
        key = _font_key(prop)
        bitmap, x_off, y_off, descent = _stamp(s, key, prop.get_size_in_points(), self.dpi, gc.get_antialiased())
        # As the whole-string path placed it: offsets of the bitmap, descent turned with the text.
        x = round(x + x_off + descent * math.sin(math.radians(angle)))
        y = round(y + y_off + descent * math.cos(math.radians(angle)))
        self._renderer.draw_text_image(bitmap, x, y + 1, angle, gc)

    def get_text_width_height_descent(self, s, prop, ismath):
        # matplotlib keeps sizes per renderer, i.e. per figure kind; these are kept per process.
        if ismath:
            return super().get_text_width_height_descent(s, prop, ismath)
        return _extent(s, _font_key(prop), prop.get_size_in_points(), self.dpi)

    def _get_font_height_metrics(self, prop):
        return _height_metrics(_font_key(prop), prop.get_size_in_points(), self.dpi)


class TextStampCanvas(FigureCanvasAgg):
    """A :class:`FigureCanvasAgg` whose renderer is a :class:`TextStampRenderer`."""

    def get_renderer(self):
        w, h = self.get_width_height(physical=True)
        key = w, h, self.figure.dpi
        if self._lastKey != key:
            self.renderer = TextStampRenderer(w, h, self.figure.dpi)
            self._lastKey = key
        return self.renderer


#: Texts of the per-process check: plain, superscript digits and a vertical axis label.
CHECK_TEXTS = (("east (km)", 0.0), ("10⁵ 0.25", 0.0), ("NSD (km²)", 90.0))


@lru_cache(maxsize=1)
def canvas_class() -> type[FigureCanvasAgg]:
    """:class:`TextStampCanvas` when its text matches matplotlib's own here, else :class:`FigureCanvasAgg`."""
    try:
        same = all(_same_ink(_ink(TextStampCanvas, text, angle), _ink(FigureCanvasAgg, text, angle))
                   for text, angle in CHECK_TEXTS)
    except Exception:  # noqa: BLE001 - any change in the internals the stamps use means: draw plainly
        same = False
    return TextStampCanvas if same else FigureCanvasAgg


def _ink(canvas: type[FigureCanvasAgg], text: str, angle: float) -> np.ndarray:
    """Ink (0-255 per pixel) of ``text`` drawn in black on white on ``canvas``."""
    fig = Figure(figsize=(2.0, 2.0), dpi=80)
    drawn = canvas(fig)
    fig.text(0.2, 0.3, text, rotation=angle, fontsize=8)
    drawn.draw()
    return 255 - np.asarray(drawn.buffer_rgba())[..., 0].astype(int)


def _same_ink(ours: np.ndarray, reference: np.ndarray) -> bool:
    """Same ink box within a pixel and the same amount of ink within 5 %."""
    boxes = []
    for ink in (ours, reference):
        rows, cols = np.nonzero(ink > 60)
        boxes.append(np.array([rows.min(), rows.max(), cols.min(), cols.max()]))
    return bool(np.abs(boxes[0] - boxes[1]).max() <= 1 and abs(ours.sum() / reference.sum() - 1.0) <= 0.05)
