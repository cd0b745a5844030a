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
  through), the table delimiter ``|`` and Markdown's emphasis and link characters
  are backslash-escaped, and line breaks become spaces (a line break ends a table row).
* :func:`terminal_text`: control characters (C0 but tab and line feed, DEL and C1,
  which includes the escape sequences that set window titles or clear the screen)
  and the bidirectional override characters are removed.
"""
from __future__ import annotations

import html
import re

REPLACEMENT = "\ufffd"
# Characters outside XML 1.0's Char production (section 2.2), surrogates included.
_NOT_XML = re.compile("[^\t\n\r\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")
# C0 controls but tab and line feed, DEL, C1 controls; bidi embeddings, overrides and isolates.
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_MARKDOWN_SPECIAL = re.compile(r"([\\`*_{}\[\]()#+!|~>-])")


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
    """A CSV cell that no spreadsheet reads as a formula; numbers and None pass unchanged."""
    if not isinstance(value, str):
        return value
    return "'" + value if value.startswith(_FORMULA_START) else value


def markdown_text(text: str) -> str:
    """``text`` for a Markdown table cell or line: no raw HTML, no markup, no line break."""
    flat = " ".join(str(text).splitlines())
    return _MARKDOWN_SPECIAL.sub(r"\\\1", html.escape(terminal_text(flat), quote=False))


def terminal_text(text: str) -> str:
    """``text`` without control characters or bidirectional overrides (tab and line feed kept)."""
    return _CONTROL.sub("", str(text))
