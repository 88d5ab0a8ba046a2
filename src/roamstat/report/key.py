"""A figure's key (legend) as HTML beside the image instead of a legend drawn in it.

A matplotlib legend costs as much to draw as a small axes (it measures and lays out every label);
the page draws the same key for free, in the same colours, and a screen reader can read it.
:func:`key_of` reads the labelled artists of some axes (what ``ax.legend()`` would show) and
:func:`key_html` turns the entries into a list of small inline SVG swatches with their labels.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from matplotlib.collections import Collection, LineCollection, PolyCollection
from matplotlib.colors import to_rgba
from matplotlib.container import BarContainer
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from roamstat.report.html import esc

#: Line2D marker codes to the swatch drawn for them; any other marker is a dot.
_MARKS = {"D": "diamond", "^": "triangle", "s": "square", "x": "cross"}


@dataclass(frozen=True)
class KeyEntry:
    """One line of a key: what is drawn (``mark``), in which colour, for which ``label``.

    ``mark`` is one of "line", "bold", "dashed", "area", "outline", "dot", "square", "triangle",
    "diamond", "cross".
    """

    label: str
    colour: str
    mark: str


def _shown_colour(colour, alpha=None) -> str:
    """The colour as seen over the white page: a translucent colour is lightened, not dropped."""
    r, g, b, a = to_rgba(colour, alpha)
    mixed = np.array([r, g, b]) * a + (1.0 - a)
    return "#" + "".join(f"{round(255 * v):02x}" for v in mixed)


def _entry(handle, label: str) -> KeyEntry:
    if isinstance(handle, BarContainer):
        handle = handle.patches[0]
    if isinstance(handle, Line2D):
        style, marker = handle.get_linestyle(), handle.get_marker()
        if style in ("None", "", " ") and marker not in (None, "None", "", " "):
            return KeyEntry(label, _shown_colour(handle.get_color(), handle.get_alpha()), _MARKS.get(str(marker), "dot"))
        mark = "dashed" if style in ("--", "dashed") else ("bold" if handle.get_linewidth() >= 2 else "line")
        return KeyEntry(label, _shown_colour(handle.get_color(), handle.get_alpha()), mark)
    if isinstance(handle, LineCollection):
        return KeyEntry(label, _shown_colour(handle.get_edgecolor()[0], handle.get_alpha()), "line")
    if isinstance(handle, PolyCollection):
        return KeyEntry(label, _shown_colour(handle.get_facecolor()[0], handle.get_alpha()), "area")
    if isinstance(handle, Collection):  # scatter: its gid names the marker when it is not a dot
        return KeyEntry(label, _shown_colour(handle.get_facecolor()[0], handle.get_alpha()), handle.get_gid() or "dot")
    if isinstance(handle, Patch):
        if handle.get_fill() and to_rgba(handle.get_facecolor())[3] > 0:
            return KeyEntry(label, _shown_colour(handle.get_facecolor()), "area")
        return KeyEntry(label, _shown_colour(handle.get_edgecolor()), "outline")
    raise TypeError(f"no key swatch for {type(handle).__name__}")


def key_of(*axes) -> tuple[KeyEntry, ...]:
    """The entries ``ax.legend()`` would show for each of ``axes``, in order, repeated labels once."""
    entries, seen = [], set()
    for ax in axes:
        for handle, label in zip(*ax.get_legend_handles_labels()):
            if label not in seen:
                seen.add(label)
                entries.append(_entry(handle, label))
    return tuple(entries)


_SWATCH = {
    "line": '<line x1="1" x2="21" y1="6" y2="6" stroke="{c}" stroke-width="2"/>',
    "bold": '<line x1="1" x2="21" y1="6" y2="6" stroke="{c}" stroke-width="3.5"/>',
    "dashed": '<line x1="1" x2="21" y1="6" y2="6" stroke="{c}" stroke-width="1.5" stroke-dasharray="4 2"/>',
    "area": '<rect x="1" y="1" width="20" height="10" fill="{c}"/>',
    "outline": '<rect x="2" y="2" width="18" height="8" fill="none" stroke="{c}" stroke-width="2"/>',
    "dot": '<circle cx="11" cy="6" r="3.5" fill="{c}"/>',
    "square": '<rect x="7" y="2" width="8" height="8" fill="{c}"/>',
    "triangle": '<polygon points="11,1 16,10 6,10" fill="{c}"/>',
    "diamond": '<polygon points="11,1 16,6 11,11 6,6" fill="{c}"/>',
    "cross": '<path d="M7 2 L15 10 M15 2 L7 10" stroke="{c}" stroke-width="1.6"/>',
}


def key_html(entries) -> str:
    """The key as a list of swatches and labels ("" without entries); swatches are decorative."""
    if not entries:
        return ""
    items = "".join(f'<li><svg width="22" height="12" viewBox="0 0 22 12" aria-hidden="true">'
                    f'{_SWATCH[e.mark].format(c=esc(e.colour))}</svg>{esc(e.label)}</li>'
                    for e in entries)
    return f'<ul class="key">{items}</ul>'


def key_text(entries) -> str:
    """The key in words for an image's alt text, e.g. ``Key: observed (line); null mean (dashed).``"""
    return ("Key: " + "; ".join(f"{e.label} ({e.mark})" for e in entries) + ".") if entries else ""
