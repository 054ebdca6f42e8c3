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
    """Text as a diagram shows it, whatever characters it holds.

    Parameters
    ----------
    text : str

    Returns
    -------
    str
        ``text`` with every control character as its control picture and every other
        code point XML cannot carry as U+FFFD.
    """
    text = _CONTROL.sub(lambda m: "\u2421" if m.group() == "\x7f" else chr(0x2400 + ord(m.group())), text)
    return _UNWRITABLE.sub("\ufffd", text)


def exact(text: str) -> str:
    """A reversible, XML-safe spelling of ``text``, for ``data-`` attributes.

    Parameters
    ----------
    text : str

    Returns
    -------
    str
        Backslash as ``\\\\``, controls and unwritable code points as ``\\uXXXX`` (as
        in JSON); everything else as is.
    """
    return _EXACT.sub(lambda m: "\\\\" if m.group() == "\\" else f"\\u{ord(m.group()):04x}", text)


def escape(text: str) -> str:
    """Text as element content or a double-quoted attribute value.

    Parameters
    ----------
    text : str

    Returns
    -------
    str
        :func:`shown`, with ``& < > "`` as entities.
    """
    return _MARKUP_RE.sub(lambda m: _MARKUP[m.group()], shown(text))


def num(x: float) -> str:
    """A coordinate as SVG gets it.

    Parameters
    ----------
    x : float

    Returns
    -------
    str
        One decimal, without a trailing ``.0``.
    """
    text = f"{x:.1f}"
    return text[:-2] if text.endswith(".0") else text


def attributes(attrs: dict) -> str:
    """An element's attributes as markup.

    Parameters
    ----------
    attrs : dict
        Name to value; a name loses a trailing ``_`` and has ``_`` as ``-``
        (``class_`` is ``class``, ``text_anchor`` is ``text-anchor``).

    Returns
    -------
    str
        `` name="value"`` pairs, values escaped; ``None`` values are left out, floats
        get :func:`num`.
    """
    out = []
    for name, value in attrs.items():
        if value is None:
            continue
        if isinstance(value, float):
            value = num(value)
        out.append(f' {name.rstrip("_").replace("_", "-")}="{escape(str(value))}"')
    return "".join(out)


def element(tag: str, content: str | None = None, **attrs) -> str:
    """One SVG element.

    Parameters
    ----------
    tag : str
    content : str, optional
        Markup (escape text with :func:`escape`, or use :func:`text`); ``None`` makes an
        empty element.
    **attrs
        Its attributes (:func:`attributes`).

    Returns
    -------
    str
    """
    if content is None:
        return f"<{tag}{attributes(attrs)}/>"
    return f"<{tag}{attributes(attrs)}>{content}</{tag}>"


def text(content: str, x: float, y: float, css: str, anchor: str = "middle", **attrs) -> str:
    """A ``<text>`` element.

    Parameters
    ----------
    content : str
        Plain text (escaped here).
    x, y : float
        Anchor point on the baseline.
    css : str
        Its CSS class.
    anchor : {"start", "middle", "end"}
        Its ``text-anchor``.
    **attrs
        Further attributes.

    Returns
    -------
    str
    """
    return element("text", escape(content), class_=css, x=float(x), y=float(y), text_anchor=anchor, **attrs)


def path_data(path: list[Segment]) -> str:
    """The ``d`` attribute of a path.

    Parameters
    ----------
    path : list of Segment
        Lines and cubic curves; a segment that does not start where the last one
        ended starts a new stroke.

    Returns
    -------
    str
        ``M``, then ``L`` and ``C`` commands (absolute coordinates).
    """
    out, here = [], None
    for segment in path:
        if segment[0] != here:  # a path is normally one stroke; a jump starts a new one
            out.append(f"M{num(segment[0][0])},{num(segment[0][1])}")
        here = segment[-1]
        points = " ".join(f"{num(px)},{num(py)}" for px, py in segment[1:])
        out.append(("L" if len(segment) == 2 else "C") + points)
    return " ".join(out)
