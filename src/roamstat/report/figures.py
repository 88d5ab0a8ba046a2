"""The report's figures: one function per figure, plain numbers in, PNG bytes out.

Figures are drawn on :class:`matplotlib.figure.Figure` objects with the Agg
canvas, never through pyplot, so no figure is kept in a global registry and
memory stays flat however many animals are drawn.  No function puts an animal
id into a figure: headings live in the HTML, where they are escaped.
"""

from __future__ import annotations

import io
import math
import threading
from dataclasses import dataclass

import numpy as np
from roamstat.report.agg_text import canvas_class
from matplotlib.dates import AutoDateLocator, ConciseDateFormatter, date2num
from matplotlib.figure import Figure
from matplotlib.ticker import LogFormatter, LogLocator, MaxNLocator
from matplotlib.transforms import ScaledTranslation
from matplotlib.patches import PathPatch, Polygon, StepPatch
from matplotlib.path import Path as MplPath
from PIL import Image

from roamstat.report.key import KeyEntry, key_of

DPI = 80  # figures are shown about 440 px wide: 80 dpi x 5 in is enough (display choice, no source)
NORMAL = (5.0, 3.6)
SQUARE = (4.2, 4.2)
#: Fixed margins in inches instead of a layout engine: the constrained layout measured every tick
#: label of every figure, about half the drawing time (profiled on the sample deployment).
MARGINS_IN = {"left": 0.78, "right": 0.12, "bottom": 0.5, "top": 0.3}
PNG_OPTIONS = {"compress_level": 1}  # zlib level 1: ~3x faster than the default 6, files ~30 % larger
#: Figures are saved as 256-colour PNGs: a plot has few colours, and quantising (fast octree, no
#: dithering; largest channel error 14 of 255 on the sample's figures) then encoding 8-bit pixels
#: costs about 40 % of encoding RGBA, files half the size (measured on the sample deployment).
PNG_COLOURS = 256
#: At most about this many intervals between major ticks: every tick label is text to lay out and
#: draw, the largest part of an axes' cost; four still reads at 440 px (display choice, no source).
TICK_BINS = 4
START_COLOUR, END_COLOUR, TRACK_COLOUR, GREY = "#1a7f37", "#c62828", "#1f5fa8", "#9e9e9e"


def _new(size, margins=None, labelsize=8, log="", **kwargs):
    fig = Figure(figsize=size, dpi=DPI)
    canvas_class()(fig)
    m = {**MARGINS_IN, **(margins or {})}
    width, height = size
    fig.subplots_adjust(left=m["left"] / width, right=1 - m["right"] / width, bottom=m["bottom"] / height,
                        top=1 - m["top"] / height, hspace=0.45, wspace=0.32)
    axes = fig.subplots(**kwargs)
    for ax in np.ravel(axes):
        # Once per figure: the axes keep it for ticks built later, while setting it on every draw
        # re-applied it to every tick (a few % of a warm pass, profiled on the sample deployment).
        ax.tick_params(labelsize=labelsize)
        if ax.name != "polar":
            ax.locator_params(nbins=TICK_BINS)
            _fixed_label_positions(fig, ax)
            if log:
                set_log(ax, x="x" in log, y="y" in log)
    return fig, axes


#: Axis labels at fixed distances (inches) from the axes, clear of tick labels of up to 6 characters
#: at 8 pt: placed automatically, each label measured every tick label of its axis and of the axes
#: sharing it on every draw, about a tenth of the drawing time (profiled on the sample deployment).
X_LABEL_BELOW_IN, Y_LABEL_LEFT_IN = 0.24, 0.56


def _fixed_label_positions(fig, ax) -> None:
    below = ScaledTranslation(0.0, -X_LABEL_BELOW_IN, fig.dpi_scale_trans)
    left = ScaledTranslation(-Y_LABEL_LEFT_IN, 0.0, fig.dpi_scale_trans)
    ax.xaxis.set_label_coords(0.5, 0.0, transform=ax.transAxes + below)
    ax.yaxis.set_label_coords(0.0, 0.5, transform=ax.transAxes + left)


#: Per process, the figure of each kind and shape, redrawn for the next animal instead of rebuilt:
#: its axes, tick objects and the renderer's text-size cache survive (about 40 % less drawing time,
#: measured on the track map). Keyed by thread too, so threads never share a figure.
_REUSED: dict = {}


def _take(key, size, margins=None, labelsize=8, log="", **kwargs):
    """A cleared figure for ``key`` (kind and shape): the process's earlier one, or a new one.

    ``labelsize`` (points) is the tick labels' size of every axes, set when the figure is built.
    ``log`` names the axes ("x", "y", "xy") log-scaled by :func:`set_log` on every axes: an axis
    already so from the last animal is kept, not reset to linear and set again (four scale changes,
    about a seventh of a log-log figure, profiled on the sample's semi-variograms).
    """
    key = (threading.get_ident(), key)  # a threaded worker (Dask) draws on one figure per thread
    held = _REUSED.get(key)
    if held is None:
        held = _REUSED[key] = _new(size, margins, labelsize, log, **kwargs)
        return held
    fig, axes = held
    for ax in np.ravel(axes):
        for artist in [*ax.lines, *ax.collections, *ax.patches, *ax.texts, *ax.images]:
            artist.remove()
        ax.containers.clear()  # a bar chart's container would otherwise stay in the next key
        if ax.name != "polar":
            # Reset only an axis whose scale, ticks or labels were changed: a reset rebuilds them.
            for name, axis, set_scale in (("x", ax.xaxis, ax.set_xscale), ("y", ax.yaxis, ax.set_yscale)):
                if name in log:
                    if axis.get_scale() != "log":
                        set_log(ax, x=name == "x", y=name == "y")
                    continue
                if axis.get_scale() != "linear" or not (axis.isDefault_majloc and axis.isDefault_majfmt):
                    set_scale("linear")
                ax.locator_params(axis=name, nbins=TICK_BINS)
            ax.set_aspect("auto")
        ax.set_xlabel("")
        ax.set_ylabel("")
        ax.set_prop_cycle(None)  # the same colours in the same order for every animal
        ax.relim()
        ax.set_autoscale_on(True)
    return held


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


class PowerLabels(LogFormatter):
    """Log-axis tick labels as plain text: 0.01, 200, 5000, then 10⁵ and 2×10⁶.

    The default log labels are mathtext, whose parsing cost about a fifth of a log-axis
    figure (profiled on the sample deployment); which ticks get a label is unchanged.
    """

    def _num_to_string(self, x, vmin, vmax):
        if 1e-3 <= x < 1e5:
            return f"{x:g}"
        exponent = math.floor(math.log10(x) + 1e-9)
        mantissa = round(x / 10.0 ** exponent)
        power = "10" + str(exponent).translate(_SUPERSCRIPT)
        return power if mantissa == 1 else f"{mantissa}×{power}"


def set_log(ax, x: bool = True, y: bool = True) -> None:
    """Log scale on the chosen axes, labelled by :class:`PowerLabels`."""
    for wanted, axis, set_scale in ((x, ax.xaxis, ax.set_xscale), (y, ax.yaxis, ax.set_yscale)):
        if wanted:
            set_scale("log")
            # Minor ticks at 2 and 5 only (labelled when the axis spans few decades): the default 2-9
            # made four times the tick objects to build and draw on a log axis.
            axis.set_minor_locator(LogLocator(subs=(2.0, 5.0)))
            axis.set_major_formatter(PowerLabels())
            axis.set_minor_formatter(PowerLabels())


@dataclass(frozen=True)
class Picture:
    """A drawn figure: the PNG file's bytes and its key, shown in the page beside the image."""

    png: bytes
    key: tuple[KeyEntry, ...] = ()


def dots(ax, x, y, s: float, color, marker: str = "o", zorder: float = 1, **style):
    """Markers of area ``s`` (pt², as ``scatter``'s ``s``) at each (x, y): one line without segments.

    ``scatter`` builds a path collection (masked copies, limits from every offset), about 3 ms per
    call even for one point; a :class:`~matplotlib.lines.Line2D` draws the same markers through the
    same renderer call for a fraction (profiled on the sample deployment). ``zorder`` 1 is
    scatter's, so markers keep their place under lines. ``style`` takes Line2D keywords
    (``alpha``, ``markeredgecolor``, ``markeredgewidth``, ``label``).
    """
    return ax.plot(x, y, linestyle="none", marker=marker, markersize=math.sqrt(s), color=color, zorder=zorder,
                   **style)


def stairs(ax, values, edges, color, fill: bool = False, **style) -> StepPatch:
    """``ax.stairs(values, edges, color=color, fill=fill, **style)`` with its extent given at once.

    ``add_patch`` (which ``stairs`` uses) walks every step of the outline as a curve segment to
    update the limits (~5 % of the drawing time, profiled on the sample deployment); the extent
    of a histogram is its first and last edge, zero and its largest value. Like ``stairs``, the
    baseline 0 is a sticky edge, so the value axis starts there.
    """
    values, edges = np.asarray(values, float), np.asarray(edges, float)
    style = {"linewidth": 0, "facecolor": color, **style} if fill else {"edgecolor": color, **style}
    patch = StepPatch(values, edges, baseline=0.0, fill=fill, transform=ax.transData, **style)
    ax.add_artist(patch)
    patch.sticky_edges.y.append(0.0)
    shown = values[np.isfinite(values)]
    ax.update_datalim([(edges[0], 0.0), (edges[-1], shown.max(initial=0.0)), (edges[0], shown.min(initial=0.0))])
    ax.autoscale(enable=None)  # limits recomputed at the draw, as Axes.stairs asks; autoscale settings kept
    return patch


def _png(fig, *key_axes) -> Picture:
    """Draw ``fig`` and encode it; the key lists the labelled artists of ``key_axes``."""
    fig.canvas.draw()
    # The canvas buffer read in place, then its alpha dropped (the figure is opaque): ~6x cheaper than
    # Image.fromarray of the array's RGB slice, which copies through a strided view.
    width, height = fig.canvas.get_width_height(physical=True)
    rgb = Image.frombuffer("RGBA", (width, height), fig.canvas.buffer_rgba(), "raw", "RGBA", 0, 1).convert("RGB")
    buffer = io.BytesIO()
    rgb.quantize(PNG_COLOURS, method=Image.Quantize.FASTOCTREE, dither=Image.Dither.NONE).save(
        buffer, format="png", **PNG_OPTIONS)
    return Picture(buffer.getvalue(), key_of(*key_axes))


def distance_scale(values) -> tuple[float, str]:
    """Divisor and unit for planar coordinates: km once the extent passes 5 km."""
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    span = float(values.max() - values.min()) if values.size else 0.0
    return (1000.0, "km") if span > 5000.0 else (1.0, "m")


def area_scale(values_m2) -> tuple[float, str]:
    """Divisor and unit for squared distances: km² once values pass 1 km²."""
    values = np.asarray(values_m2, dtype=float)
    values = values[np.isfinite(values)]
    top = float(np.abs(values).max()) if values.size else 0.0
    return (1e6, "km²") if top > 1e6 else (1.0, "m²")


def _coordinate_labels(ax, unit: str, masked: bool) -> None:
    suffix = f" ({unit}, masked: relative to a hidden origin)" if masked else f" ({unit})"
    ax.set_xlabel("east" + suffix, fontsize=8)
    ax.set_ylabel("north" + suffix, fontsize=8)
    ax.set_aspect("equal", adjustable="datalim")


def track_map(x_m, y_m, rejected_x_m=None, rejected_y_m=None, masked: bool = False) -> Picture:
    """Track in planar metres, start and end marked, rejected fixes faint.

    Parameters
    ----------
    x_m, y_m : array-like
        Kept fixes in time order (metres, the animal's planar frame).
    rejected_x_m, rejected_y_m : array-like, optional
        Rejected fixes that had valid coordinates, in the same frame.
    masked : bool
        Label the axes as masked coordinates.
    """
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    rx = np.asarray([] if rejected_x_m is None else rejected_x_m, float)
    ry = np.asarray([] if rejected_y_m is None else rejected_y_m, float)
    scale, unit = distance_scale(np.concatenate([x, y, rx, ry]))
    fig, ax = _take("track", NORMAL)
    if rx.size:
        dots(ax, rx / scale, ry / scale, 16, "#7a7a7a", "x", alpha=0.6, markeredgewidth=0.9,
             label=f"rejected ({rx.size})")
    ax.plot(x / scale, y / scale, color=TRACK_COLOUR, linewidth=0.8 if x.size < 1000 else 0.5, alpha=0.8)
    dots(ax, x / scale, y / scale, 4 if x.size < 1000 else 1, TRACK_COLOUR, label=f"kept fixes ({x.size})")
    if x.size:
        dots(ax, [x[0] / scale], [y[0] / scale], 90, START_COLOUR, "^", zorder=5, markeredgecolor="white",
             label="start")
        dots(ax, [x[-1] / scale], [y[-1] / scale], 75, END_COLOUR, "s", zorder=5, markeredgecolor="white",
             label="end")
    _coordinate_labels(ax, unit, masked)
    return _png(fig, ax)


def step_histogram(step_m, curves, log_axes: bool) -> Picture:
    """Histogram of step lengths as a density, with fitted densities on top.

    Parameters
    ----------
    step_m : array-like
        Step lengths used by the fits (metres, > 0).
    curves : list of (label, x, density)
        Fitted densities evaluated on a grid; ``density`` is per metre of the
        whole sample (a tail law is scaled by the fraction of steps it covers).
    log_axes : bool
        Log-spaced bins and log axes, for heavy-tailed samples.
    """
    steps = np.asarray(step_m, float)
    steps = steps[np.isfinite(steps) & (steps > 0)]
    fig, ax = _take("steps", NORMAL, log="xy" if log_axes else "")
    lowest = highest = None
    if steps.size:
        if log_axes:
            bins = np.geomspace(steps.min(), steps.max() * 1.0001, 30)
        else:
            bins = np.linspace(0.0, steps.max() * 1.0001, 30)
        # One outline artist instead of a patch per bin: same picture, a fraction of the drawing time.
        heights, _ = np.histogram(steps, bins=bins, density=True)
        stairs(ax, heights, bins, "#cfd8e3", fill=True, label=f"observed ({steps.size})")
        stairs(ax, heights, bins, "#8ea2bb", linewidth=0.8)
        lowest, highest = heights[heights > 0].min(), heights.max()
    for label, x, density in curves:
        density = np.asarray(density, float)
        shown = np.isfinite(density) & (density > 0)
        ax.plot(np.asarray(x, float)[shown], density[shown], linewidth=1.6, label=str(label))
    if log_axes:
        if lowest is not None and highest is not None:
            # A light-tailed density falls to 1e-15 in the tail; the axis follows the data instead.
            ax.set_ylim(lowest / 5.0, highest * 3.0)
    ax.set_xlabel("step length (m)" + (", log scale" if log_axes else ""), fontsize=8)
    ax.set_ylabel("density (per m)", fontsize=8)
    return _png(fig, ax)


def turn_rose(turn_rad, curves) -> Picture:
    """Rose (polar histogram) of turning angles with fitted densities.

    Straight ahead points up; right (clockwise, positive) turns to the right,
    the data contract's sign convention.

    Parameters
    ----------
    turn_rad : array-like
        Turning angles in (-pi, pi].
    curves : list of (label, theta, density)
        Fitted densities (per radian) on a grid of angles.
    """
    turns = np.asarray(turn_rad, float)
    turns = turns[np.isfinite(turns)]
    fig, ax = _take("turns", SQUARE, {"left": 0.45, "right": 0.45, "bottom": 0.35, "top": 0.35}, labelsize=7,
                    subplot_kw={"projection": "polar"})
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    edges = np.linspace(-np.pi, np.pi, 25)
    top = 0.0
    if turns.size:
        counts, _ = np.histogram(turns, bins=edges)
        density = counts / (turns.size * np.diff(edges))
        # The rose as one closed outline (wedges from the centre), not one bar patch per sector.
        theta, radius = np.repeat(edges, 2)[1:-1], np.repeat(density, 2)
        # Added as a plain artist: the limits are set below, so add_patch's walk of the outline is not needed.
        outline = np.column_stack([np.mod(np.r_[theta, theta[:1]], 2 * np.pi), np.r_[radius, radius[:1]]])
        ax.add_artist(Polygon(outline, closed=True, facecolor="#cfd8e3", edgecolor="#8ea2bb", linewidth=0.8,
                              label=f"observed ({turns.size})", transform=ax.transData))
        top = density.max()
    for label, theta, density in curves:
        density = np.asarray(density, float)
        ax.plot(np.asarray(theta, float), density, linewidth=1.6, label=str(label))
        top = max(top, np.nanmax(density, initial=0.0))
    ax.set_xlim(0.0, 2 * np.pi)  # the whole circle, whatever the outline's extent
    ax.set_ylim(0.0, 1.05 * top if top > 0 else 1.0)
    ax.yaxis.set_major_locator(MaxNLocator(4))
    ax.set_xticks(np.deg2rad([0, 90, 180, 270]), ["ahead", "right", "back", "left"])
    return _png(fig, ax)


def nsd_envelopes(panels) -> Picture:
    """Observed net squared displacement against each null model's envelope.

    Parameters
    ----------
    panels : list of dict
        One per null model: ``name``, ``x``, ``x_label`` (what ``x`` is, with its unit),
        ``observed``, and optionally ``lo``, ``hi`` (pointwise envelope) and ``mean`` — all NSD in m².
        Consecutive panels with the same ``x_label`` share their x axis; the NSD axis is shared by all.
    """
    every = np.concatenate([np.asarray(p[k], float).ravel() for p in panels
                            for k in ("observed", "lo", "hi", "mean") if p.get(k) is not None])
    scale, unit = area_scale(every)
    labels = tuple(p["x_label"] for p in panels)
    # Panels stacked (not side by side) so each stays legible on a phone-width screen.
    fig, axes = _take(("nsd", labels), (NORMAL[0], 0.9 + 2.1 * len(panels)), nrows=len(panels), sharey=True,
                      squeeze=False, labelsize=7)
    for i, (ax, panel) in enumerate(zip(axes[:, 0], panels)):
        x = np.asarray(panel["x"], float)
        if panel.get("lo") is not None and panel.get("hi") is not None:
            _band(ax, x, np.asarray(panel["lo"], float) / scale, np.asarray(panel["hi"], float) / scale,
                  color="#d9d9d9", label="null envelope")
        if panel.get("mean") is not None:
            ax.plot(x, np.asarray(panel["mean"], float) / scale, color="#555555", linestyle="--", linewidth=1,
                    label="null mean")
        ax.plot(x, np.asarray(panel["observed"], float) / scale, color="black", linewidth=1.3, label="observed")
        # A text in the axes, not a title: placing titles measured every tick label again.
        ax.text(0.0, 1.02, f"null model: {panel['name']}", transform=ax.transAxes, ha="left", va="bottom", fontsize=9)
        ax.set_ylabel(f"NSD ({unit})", fontsize=8)
        # The x axis is labelled under the last of a run of panels with the same x (steps or days).
        last_of_run = i + 1 == len(panels) or labels[i + 1] != labels[i]
        if ax.xaxis.get_tick_params()["labelbottom"] != last_of_run:  # kept by a reused figure: no re-applying
            ax.tick_params(labelbottom=last_of_run)
        ax.set_xlabel(labels[i] if last_of_run else "", fontsize=8)
    return _png(fig, axes[0, 0])


def _band(ax, x, lo, hi, **style) -> None:
    """The area between ``lo`` and ``hi`` as one polygon, its extent given at once (cheaper than fill_between)."""
    vertices = np.column_stack([np.r_[x, x[::-1]], np.r_[lo, hi[::-1]]])
    vertices = vertices[np.isfinite(vertices).all(axis=1)]
    if len(vertices) < 3:
        return
    ax.add_artist(Polygon(vertices, closed=True, linewidth=0, transform=ax.transData, **style))
    ax.update_datalim(vertices)


def residency_fit(t, observed, fitted, y_label: str, t_label: str) -> Picture:
    """Observed NSD through time with the fitted residency models.

    Parameters
    ----------
    t : array-like
        Times (datetimes or numbers) of the observations.
    observed : array-like
        Observed NSD in the unit named by ``y_label``.
    fitted : list of (label, t, values, chosen)
        Fitted curves; the chosen model is drawn bold.
    """
    fig, ax = _take("residency", NORMAL, labelsize=7)
    dates = np.issubdtype(np.asarray(t).dtype, np.datetime64)
    # Dates as plain day numbers with a date locator: no unit converter stays on the reused axis.
    as_x = (lambda v: date2num(np.asarray(v, "datetime64[ns]"))) if dates else (lambda v: np.asarray(v, float))
    dots(ax, as_x(t), np.asarray(observed, float), 5, GREY, label="observed")
    for label, tt, values, chosen in fitted:
        ax.plot(as_x(tt), np.asarray(values, float), linewidth=2.2 if chosen else 1.0,
                alpha=1.0 if chosen else 0.7, label=f"{label} (chosen)" if chosen else str(label))
    ax.set_xlabel(t_label, fontsize=8)
    ax.set_ylabel(y_label, fontsize=8)
    if dates:
        locator = AutoDateLocator(maxticks=6)
        ax.xaxis.set_major_locator(locator)
        ax.xaxis.set_major_formatter(ConciseDateFormatter(locator))
    return _png(fig, ax)


def range_contours(x_m, y_m, contours, masked: bool = False) -> Picture:
    """Home-range outlines over the fixes.

    Parameters
    ----------
    x_m, y_m : array-like
        The fixes (metres), drawn faintly.
    contours : list of (label, rings)
        ``rings`` is a list of (N, 2) coordinate arrays in metres, exteriors
        counter-clockwise and holes clockwise, so the non-zero fill rule
        leaves holes empty.
    masked : bool
        Label the axes as masked coordinates.
    """
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    ring_values = [np.asarray(r, float) for _, rings in contours for r in rings]
    every = np.concatenate([x, y] + [r.ravel() for r in ring_values]) if ring_values else np.concatenate([x, y])
    scale, unit = distance_scale(every)
    fig, ax = _take("range", NORMAL)
    dots(ax, x / scale, y / scale, 3, GREY, alpha=0.5, label="fixes")
    colours = ["#1f5fa8", "#e07b00", "#6a3d9a", "#1a7f37", "#c62828", "#00838f"]
    for i, (label, rings) in enumerate(contours):
        if not rings:
            continue
        colour = colours[i % len(colours)]
        vertices, codes = [], []
        for ring in rings:
            ring = np.asarray(ring, float) / scale
            vertices.extend(ring.tolist())
            codes.extend([MplPath.MOVETO] + [MplPath.LINETO] * (len(ring) - 2) + [MplPath.CLOSEPOLY])
        path = MplPath(vertices, codes)
        # Added as plain artists with their extent given at once: add_patch walks every curve
        # segment of a long outline to update the limits (profiled on the sample's KDE contours).
        ax.add_artist(PathPatch(path, facecolor=colour, edgecolor=colour, alpha=0.18, label=None,
                                transform=ax.transData))
        ax.add_artist(PathPatch(path, facecolor="none", edgecolor=colour, linewidth=1.4, label=str(label),
                                transform=ax.transData))
        ax.update_datalim(np.asarray(vertices))
    ax.autoscale_view()
    _coordinate_labels(ax, unit, masked)
    return _png(fig, ax)


def area_curve(series) -> Picture:
    """Range area against the number of fixes used (Harris et al. 1990).

    Parameters
    ----------
    series : list of (label, n_fixes, area_km2)
        One line per estimator and level.
    """
    fig, ax = _take("area", NORMAL, labelsize=7)
    for label, n, area in series:
        ax.plot(np.asarray(n, float), np.asarray(area, float), marker="o", markersize=3, linewidth=1.2,
                label=str(label))
    ax.set_xlabel("fixes used", fontsize=8)
    ax.set_ylabel("area (km²)", fontsize=8)
    ax.set_ylim(bottom=0)
    return _png(fig, ax)
