"""Small inline SVG graphics for table cells (no file, no script, allowed by the page's policy)."""

from __future__ import annotations

import math

WIDTH, HEIGHT = 120, 16
RATIO_SPAN = 20.0  # the axis runs from 1/20 to 20 times the null median, log scale (display choice, no source)


def _x(ratio: float) -> float:
    ratio = min(max(ratio, 1.0 / RATIO_SPAN), RATIO_SPAN)
    return 4 + (WIDTH - 8) * (math.log(ratio) / math.log(RATIO_SPAN) + 1) / 2


def interval_svg(test) -> str:
    """Dot-and-interval: the null's 95 % range of end distances (bar), its median (tick) and the animal (dot).

    Distances are drawn as ratios to the null median on one log axis shared by every animal, so the
    overview's rows compare at a glance; "" when the row lacks the numbers.
    """
    try:
        median = float(test.get("null_median_m"))
        lo, hi = float(test.get("null_q025_m")) / median, float(test.get("null_q975_m")) / median
        observed = float(test.get("observed_net_m")) / median
    except (TypeError, ValueError, ZeroDivisionError, AttributeError):
        return ""
    if not all(math.isfinite(v) and v > 0 for v in (lo, hi, observed)):
        return ""
    mid = HEIGHT / 2
    colour = "#c62828" if observed > hi else ("#1a7f37" if observed < lo else "#1b1f24")
    return (f'<svg class="interval" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" role="img" '
            f'aria-label="animal at {observed:.2g} times the null median; null 95 % range {lo:.2g} to {hi:.2g}">'
            f'<line x1="4" x2="{WIDTH - 4}" y1="{mid}" y2="{mid}" stroke="#e1e5ea"/>'
            f'<line x1="{_x(lo):.1f}" x2="{_x(hi):.1f}" y1="{mid}" y2="{mid}" stroke="#8a96a3" stroke-width="4"/>'
            f'<line x1="{_x(1):.1f}" x2="{_x(1):.1f}" y1="2" y2="{HEIGHT - 2}" stroke="#39424d" stroke-width="1.5"/>'
            f'<circle cx="{_x(observed):.1f}" cy="{mid}" r="4" fill="{colour}" stroke="#fff"/></svg>')
