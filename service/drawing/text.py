"""Fonts of a diagram and how much room a piece of text takes.

Labels are placed so that their boxes do not meet, so the layout must know a text's
width before any browser renders it. The widths below are DejaVu Sans advance
widths in thousandths of an em, for printable ASCII, measured once in headless
chromium with ``getComputedTextLength`` (the diagram asks for DejaVu Sans first;
Verdana, the fallback, has close metrics). Other characters are estimated
generously; :data:`SLACK` covers rounding and the halo drawn behind arc labels.
``tests/test_diagram_geometry.py`` checks the estimate against a real browser.
"""

from __future__ import annotations

import unicodedata
from dataclasses import dataclass
from functools import lru_cache

from .geometry import Box

FONT_FAMILY = "'DejaVu Sans',Verdana,sans-serif"

# chr(32) .. chr(126); regular (400) and bold (600 and 700 measure the same).
_REGULAR = (318, 401, 460, 838, 636, 950, 780, 275, 390, 390, 500, 838, 318, 361, 318, 337, 636, 636,
            636, 636, 636, 636, 636, 636, 636, 636, 337, 337, 838, 838, 838, 531, 1000, 709, 686, 698,
            770, 632, 575, 775, 752, 295, 295, 656, 557, 863, 748, 787, 603, 787, 695, 635, 595, 732,
            684, 989, 685, 611, 685, 390, 337, 390, 838, 500, 500, 613, 635, 550, 635, 615, 344, 635,
            634, 278, 278, 579, 278, 974, 634, 612, 635, 635, 395, 521, 392, 634, 592, 818, 592, 592,
            525, 636, 337, 636, 838)
_BOLD = (350, 456, 521, 838, 696, 1002, 872, 306, 457, 457, 523, 838, 380, 415, 380, 365, 696, 696,
         696, 696, 696, 696, 696, 696, 696, 696, 400, 400, 838, 838, 838, 580, 1000, 774, 762, 734,
         830, 683, 683, 821, 837, 372, 372, 775, 637, 995, 837, 850, 733, 850, 770, 680, 703, 812,
         774, 1103, 771, 724, 725, 457, 365, 457, 838, 500, 500, 675, 716, 593, 716, 678, 405, 716,
         712, 343, 343, 665, 343, 1042, 712, 687, 716, 716, 493, 595, 478, 712, 652, 924, 645, 652,
         582, 712, 365, 712, 838)
#: The other characters the diagram itself writes (measured as above), in em.
_KNOWN = {"π": 0.60, "∞": 0.84, "…": 1.0, "→": 0.84, "≥": 0.84, "≤": 0.84, "·": 0.32, "∝": 0.84}
#: Width of any other character that is neither wide nor a combining mark: generous
#: (Cyrillic capitals reach 1.08 em; a glyph from a fallback font may be wider still).
_OTHER = 1.1
SLACK = 1.04
#: Height of a text box: from the top of capitals and digits to the bottom of descenders.
ASCENT, DESCENT = 0.78, 0.25


@dataclass(frozen=True)
class Font:
    """A text style: size in px, weight, and extra space after each character in px."""

    size: float
    weight: int = 400
    spacing: float = 0.0


#: The diagram's text styles by CSS class (the SVG writer turns these into its style sheet).
FONTS = {
    "title": Font(15, 700),
    "subtitle": Font(11.5),
    "node-label": Font(11.5, 600),
    "role": Font(9, 400, 1.0),
    "potential": Font(10),
    "arc-label": Font(10.5),
    "legend": Font(10.5),
}


@lru_cache(maxsize=4096)
def _em(ch: str, bold: bool) -> float:
    code = ord(ch)
    if 32 <= code < 127:
        return (_BOLD if bold else _REGULAR)[code - 32] / 1000
    if ch in _KNOWN:
        return _KNOWN[ch]
    if unicodedata.combining(ch):
        return 0.0
    if unicodedata.east_asian_width(ch) in ("W", "F"):
        return 1.0
    base = unicodedata.normalize("NFD", ch)[0]
    if base != ch and 32 <= ord(base) < 127:  # an accented Latin letter: its base letter's width
        return _em(base, bold)
    return _OTHER


def text_width(text: str, font: Font) -> float:
    """Estimated rendered width of a text.

    Parameters
    ----------
    text : str
    font : Font

    Returns
    -------
    float
        Width in px: at least the real width, in practice (a margin of ``SLACK``).
    """
    bold = font.weight >= 600
    return (sum(_em(ch, bold) for ch in text) * font.size + font.spacing * len(text)) * SLACK


def text_box(text: str, font: Font, x: float, baseline: float, anchor: str = "middle") -> Box:
    """The box a text covers once drawn.

    Parameters
    ----------
    text : str
    font : Font
    x, baseline : float
        Where it is drawn.
    anchor : {"start", "middle", "end"}
        Its ``text-anchor``.

    Returns
    -------
    Box
        From the font's ascent above the baseline to its descent below.
    """
    width = text_width(text, font)
    left = {"start": x, "middle": x - width / 2, "end": x - width}[anchor]
    return Box(left, baseline - ASCENT * font.size, left + width, baseline + DESCENT * font.size)
