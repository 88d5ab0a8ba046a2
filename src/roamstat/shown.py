"""Text from data made safe to show: control and bidi-override characters written as escapes.

Animal ids, file names and values may hold terminal control sequences (ESC,
BEL, C1 controls such as CSI) or Unicode bidirectional overrides (U+202E and
kin), which recolour a terminal, retitle its window or reorder what a reader
sees (the "Trojan Source" spoofing, Boucher & Anderson 2021; bidi controls as
listed in Unicode Standard Annex #9).  Terminal output and the HTML report show
them as ``\\x1b`` or ``\\u202e``; the data tables keep the values as read.

References
----------
Boucher, N. & Anderson, R. (2021). Trojan Source: Invisible Vulnerabilities.
arXiv:2111.00169.
Unicode Standard Annex #9, Unicode Bidirectional Algorithm, sec. 2 (explicit
formatting characters).
"""

from __future__ import annotations

import re

# C0 and C1 controls, DEL, line/paragraph separators, and the explicit bidi formatting characters.
_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e\u2066-\u2069]")


def _escape(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def shown(text) -> str:
    """``text`` with every control or bidi-override character as a visible escape.

    Line feeds and tabs are kept: they lay out multi-line messages.

    Parameters
    ----------
    text : object
        Anything; ``str(text)`` is escaped.

    Returns
    -------
    str
    """
    return _UNSAFE.sub(_escape, str(text))
