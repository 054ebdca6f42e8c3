"""Writing SVG: elements, path data, and text that is always well-formed XML.

Node ids and arc keys come from clients and may hold anything JSON can carry,
including characters XML 1.0 cannot carry at all, escaped or not: the C0 controls
other than tab, newline and carriage return, and U+FFFE, U+FFFF and lone surrogates.
Everything a diagram shows goes through :func:`shown`, which draws each control
character as its Unicode control picture (U+0000 as ␀, U+001F as ␟, DEL as ␡; tab,
newline and carriage return too, since SVG would fold them into spaces) and the
other unwritable code points as U+FFFD. ``data-`` attributes that name an id for a
program (``data-node``) use :func:`exact` instead, a reversible escape.
"""

from __future__ import annotations

import re

from .geometry import Segment

_CONTROL = re.compile("[\x00-\x1f\x7f]")
_UNWRITABLE = re.compile("[\ud800-\udfff\ufffe\uffff]")
_EXACT = re.compile("[\\\\\x00-\x1f\x7f\ud800-\udfff\ufffe\uffff]")
_MARKUP = {"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;"}
_MARKUP_RE = re.compile('[&<>"]')


def shown(text: str) -> str:
    """``text`` with every character XML cannot carry replaced by a visible stand-in."""
    text = _CONTROL.sub(lambda m: "\u2421" if m.group() == "\x7f" else chr(0x2400 + ord(m.group())), text)
    return _UNWRITABLE.sub("\ufffd", text)


def exact(text: str) -> str:
    """A reversible, XML-safe spelling of ``text``: backslash as ``\\\\``, controls
    and unwritable code points as ``\\uXXXX`` (as in JSON); everything else as is."""
    return _EXACT.sub(lambda m: "\\\\" if m.group() == "\\" else f"\\u{ord(m.group()):04x}", text)


def escape(text: str) -> str:
    """``text`` as element content or a double-quoted attribute value."""
    return _MARKUP_RE.sub(lambda m: _MARKUP[m.group()], shown(text))


def num(x: float) -> str:
    """A coordinate: one decimal, no trailing ``.0``."""
    text = f"{x:.1f}"
    return text[:-2] if text.endswith(".0") else text


def attributes(attrs: dict) -> str:
    """`` name="value"`` pairs; ``None`` values are left out, floats get :func:`num`."""
    out = []
    for name, value in attrs.items():
        if value is None:
            continue
        if isinstance(value, float):
            value = num(value)
        out.append(f' {name.rstrip("_").replace("_", "-")}="{escape(str(value))}"')
    return "".join(out)


def element(tag: str, content: str | None = None, **attrs) -> str:
    """An element; ``content`` is markup (escape text with :func:`escape` or use :func:`text`)."""
    if content is None:
        return f"<{tag}{attributes(attrs)}/>"
    return f"<{tag}{attributes(attrs)}>{content}</{tag}>"


def text(content: str, x: float, y: float, css: str, anchor: str = "middle", **attrs) -> str:
    """A ``<text>`` element of class ``css`` at baseline ``(x, y)``."""
    return element("text", escape(content), class_=css, x=float(x), y=float(y), text_anchor=anchor, **attrs)


def path_data(path: list[Segment]) -> str:
    """``d`` of a path of lines and cubic curves: ``M``, then ``L`` and ``C`` (absolute)."""
    out, here = [], None
    for segment in path:
        if segment[0] != here:  # a path is normally one stroke; a jump starts a new one
            out.append(f"M{num(segment[0][0])},{num(segment[0][1])}")
        here = segment[-1]
        points = " ".join(f"{num(px)},{num(py)}" for px, py in segment[1:])
        out.append(("L" if len(segment) == 2 else "C") + points)
    return " ".join(out)
