"""Text made safe for the formats crewcut writes: XML 1.0, CSV cells, Markdown, the terminal.

Street names, crew ids and file names come from the user's data and may hold
anything. Each writer passes them through the function for its format:

* :func:`xml_text` and :func:`xml_attr`: XML 1.0 allows only the characters of
  its ``Char`` production (W3C XML 1.0, 5th ed., section 2.2): tab, line feed,
  carriage return, U+0020-U+D7FF, U+E000-U+FFFD and U+10000-U+10FFFF. Any other
  character makes the whole document unreadable (an in-cab device gets nothing),
  so it is replaced by U+FFFD and :func:`xml_replacements` counts the
  replacements; ``&``, ``<``, ``>`` (and quotes in attributes) are escaped.
* :func:`csv_cell`: a text cell whose first character is ``=``, ``+``, ``-``,
  ``@``, tab or carriage return is read as a formula by spreadsheet programs;
  following the common guidance for CSV injection (OWASP, "CSV Injection"), such
  a cell is prefixed with a single quote. Numbers are written as numbers and left
  alone.
* :func:`markdown_text`: HTML is escaped (a Markdown renderer passes raw HTML
  through, CommonMark 0.31 section 6.6), the table delimiter ``|`` and the
  characters that open inline markup anywhere in a line (code spans, emphasis,
  links and images, GFM strikethrough: backslash, backtick, ``* _ [ ] ~``) are
  backslash-escaped (CommonMark section 2.4), and line breaks become spaces (a
  line break ends a table row); control characters go as in :func:`terminal_text`
  and noncharacters as in :func:`html_text`. Characters that mean something only at the start
  of a line (``# - + >``, digits) are left alone: this text never starts a line
  of crewcut's Markdown (it follows ``| ``, ``- `` or a heading's own words).
* :func:`html_text`: HTML5 text must not hold control characters other than
  ASCII whitespace, nor noncharacters (WHATWG HTML, "13.2.3.5 Preprocessing the
  input stream"); they are removed (noncharacters and unpaired surrogates, which
  UTF-8 cannot encode at all, become U+FFFD), then the text is escaped with
  :func:`html.escape`.
* :func:`terminal_text`: control characters (C0 but tab and line feed, DEL and C1,
  which includes the escape sequences that set window titles or clear the screen)
  and the bidirectional override characters are removed; unpaired surrogates
  (which UTF-8 cannot encode) become U+FFFD.

Writers of XML count what they replaced with an :class:`XmlEscaper` and say so
once in the document (:func:`xml_note`); they return a :class:`SafeText`.
"""
from __future__ import annotations

import html
import re
from dataclasses import dataclass

REPLACEMENT = "\ufffd"
# Characters outside XML 1.0's Char production (section 2.2), surrogates included.
_NOT_XML = re.compile("[^\t\n\r\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")
# C0 controls but tab and line feed, DEL, C1 controls; bidi embeddings, overrides and isolates.
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_MARKDOWN_SPECIAL = re.compile(r"([\\`*_\[\]|~])")
# What HTML5 text may not hold: C0 controls but ASCII whitespace, DEL and C1 (removed; form feed
# too, which HTML5 allows but XML, and so an XHTML reader, does not) ...
_NOT_HTML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")
# ... and noncharacters and unpaired surrogates (replaced by U+FFFD).
_NONCHAR = re.compile("[\ud800-\udfff\ufdd0-\ufdef\ufffe\uffff\U0001fffe\U0001ffff\U0002fffe\U0002ffff"
                      "\U0003fffe\U0003ffff\U0004fffe\U0004ffff\U0005fffe\U0005ffff\U0006fffe\U0006ffff"
                      "\U0007fffe\U0007ffff\U0008fffe\U0008ffff\U0009fffe\U0009ffff\U000afffe\U000affff"
                      "\U000bfffe\U000bffff\U000cfffe\U000cffff\U000dfffe\U000dffff\U000efffe\U000effff"
                      "\U000ffffe\U000fffff\U0010fffe\U0010ffff]")
_SURROGATE = re.compile("[\ud800-\udfff]")


def xml_replacements(text: str) -> int:
    """How many characters of ``text`` XML 1.0 cannot hold (each becomes U+FFFD)."""
    return len(_NOT_XML.findall(text))


def xml_text(text: str) -> str:
    """``text`` as XML 1.0 character data: illegal characters replaced, ``& < >`` escaped."""
    return html.escape(_NOT_XML.sub(REPLACEMENT, str(text)), quote=False)


def xml_attr(text: str) -> str:
    """``text`` as an XML 1.0 attribute value (double or single quoted)."""
    return html.escape(_NOT_XML.sub(REPLACEMENT, str(text)), quote=True)


def csv_cell(value):
    """A CSV cell that no spreadsheet reads as a formula; numbers and None pass unchanged.

    OWASP, "CSV Injection": a cell starting with = + - @ tab or CR gets a leading
    single quote. Unpaired surrogates (not encodable as UTF-8) become U+FFFD.
    """
    if not isinstance(value, str):
        return value
    value = _SURROGATE.sub(REPLACEMENT, value)
    return "'" + value if value.startswith(_FORMULA_START) else value


def markdown_text(text: str) -> str:
    """``text`` for a Markdown table cell or line: no raw HTML, no markup, no line break."""
    flat = " ".join(str(text).splitlines())
    flat = _NONCHAR.sub(REPLACEMENT, terminal_text(flat))  # Markdown becomes HTML: what HTML may not hold goes
    return _MARKDOWN_SPECIAL.sub(r"\\\1", html.escape(flat, quote=False))


def terminal_text(text: str) -> str:
    """``text`` without control characters or bidirectional overrides (tab and line feed kept)."""
    return _SURROGATE.sub(REPLACEMENT, _CONTROL.sub("", str(text)))


def html_text(text: str, quote: bool = True) -> str:
    """``text`` for HTML5 text or a quoted attribute: no control characters or noncharacters, escaped."""
    return html.escape(_NONCHAR.sub(REPLACEMENT, _NOT_HTML.sub("", str(text))), quote=quote)


def xml_note(replaced: int) -> str:
    """The sentence a document carries when ``replaced`` characters were replaced (empty when none)."""
    if not replaced:
        return ""
    what = "character" if replaced == 1 else "characters"
    return f"{replaced} {what} that XML 1.0 cannot hold {'was' if replaced == 1 else 'were'} replaced by U+FFFD"


class XmlEscaper:
    """:func:`xml_text` and :func:`xml_attr` that count the characters they replace (``replaced``)."""

    def __init__(self) -> None:
        self.replaced = 0

    def text(self, text: str) -> str:
        self.replaced += xml_replacements(str(text))
        return xml_text(text)

    def attr(self, text: str) -> str:
        self.replaced += xml_replacements(str(text))
        return xml_attr(text)


@dataclass(frozen=True)
class SafeText:
    """A document as text and how many characters of the user's text had to be replaced in it."""

    text: str
    replaced: int = 0

    @property
    def note(self) -> str:
        """The note to show a user ("N characters that XML 1.0 cannot hold were replaced ..."), or ""."""
        return xml_note(self.replaced)
