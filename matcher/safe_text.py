"""Making library and user text safe for spreadsheets and web pages.

Library names, peak ids and spectral-search hits come from files anyone may
have edited. Two places would *run* such text instead of showing it:

**Spreadsheets** (CSV and XLSX). A cell whose text begins with ``=``, ``+``,
``-`` or ``@`` is taken as a formula by common spreadsheet programs, and so
is one that begins with a tab or a carriage return. Following the OWASP
guidance on CSV injection (OWASP Foundation, "CSV Injection",
https://owasp.org/www-community/attacks/CSV_Injection; also the OWASP
Application Security Verification Standard 5.0, requirement 1.2.10, which
adds the NUL character), such a
cell gets a leading single quote, which spreadsheets show as plain text.
We also look past leading white space (``" =1+1"`` is still dangerous in some
programs), and treat a line feed, NUL and the full-width forms of the four
signs (U+FF1D, U+FF0B, U+FF0D, U+FF20) as triggers too: a defensive
extension of ours, cheap and harmless.

Only **text** is neutralised. A genuine number stays a number: numeric
columns are never passed through :func:`neutralise`, and a text cell that is
exactly a plain decimal number (``"-3.2"``, ``"+1e5"``) is left alone,
because a spreadsheet reads it as that number and runs nothing.

>>> neutralise('=HYPERLINK("http://x")')
'\\'=HYPERLINK("http://x")'
>>> neutralise("@SUM(1)"), neutralise("-2+3"), neutralise("  +cmd")
("'@SUM(1)", "'-2+3", "'  +cmd")
>>> neutralise("-3.2"), neutralise("alpha-pinene"), neutralise(1020.5)
('-3.2', 'alpha-pinene', 1020.5)

**Web pages**. Every piece of text placed in the HTML report goes through
:func:`html_text`, which is :func:`html.escape` with ``quote=True``, so that
text can sit both between tags and inside attribute values; control and
bidirectional characters are shown escaped first (:func:`terminal_text`).

**Terminals**. :func:`terminal_text` shows control and bidi characters
escaped; the command line passes everything it prints through it.

>>> html_text('"><img src=x onerror=alert(1)>')
'&quot;&gt;&lt;img src=x onerror=alert(1)&gt;'
>>> html_text(None)
''
"""

from __future__ import annotations

import html
import re
from typing import Any

#: Characters that make a spreadsheet treat a cell as a formula (OWASP, ASVS),
#: plus line feed and the full-width forms of the four signs (our extension).
FORMULA_TRIGGERS: frozenset[str] = frozenset("=+-@\t\r\n\x00\uff1d\uff0b\uff0d\uff20")

#: A plain decimal number, as a spreadsheet would read it (no spaces, no ``inf``/``nan``).
_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")

# XML 1.0 forbids most C0 control characters; openpyxl refuses to store them.
_XML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def is_plain_number(text: str) -> bool:
    """True when ``text`` is exactly a decimal number such as ``-3.2`` or ``1e5``.

    >>> is_plain_number("-3.2"), is_plain_number("-2+3"), is_plain_number("-inf"), is_plain_number(" 1")
    (True, False, False, False)
    """
    return _PLAIN_NUMBER.fullmatch(text) is not None


def needs_neutralising(text: str) -> bool:
    """True when a spreadsheet could run ``text`` as a formula.

    >>> needs_neutralising("=1+1"), needs_neutralising(" \\t=1"), needs_neutralising("limonene")
    (True, True, False)
    >>> needs_neutralising("-12.5"), needs_neutralising("")
    (False, False)
    """
    if not text:
        return False
    first = text[0]
    if first not in FORMULA_TRIGGERS:
        stripped = text.lstrip()
        if not stripped or stripped[0] not in FORMULA_TRIGGERS:
            return False
    return not is_plain_number(text)


def neutralise(value: Any) -> Any:
    """A text cell made safe for a spreadsheet; anything that is not text is returned unchanged.

    The result never begins (even after white space) with a formula trigger:
    a dangerous text gets one leading single quote.
    """
    if isinstance(value, str) and needs_neutralising(value):
        return "'" + value
    return value


def spreadsheet_text(value: Any) -> Any:
    """:func:`neutralise`, then characters XML cannot hold replaced by U+FFFD (for XLSX cells).

    >>> spreadsheet_text("bad\\x01name") == "bad\\ufffdname", spreadsheet_text("\\x00=1") == "'\\ufffd=1"
    (True, True)
    """
    value = neutralise(value)
    if isinstance(value, str):
        return _XML_ILLEGAL.sub("\ufffd", value)
    return value


# C0 controls except tab and line feed; DEL and the C1 controls (0x9B is a one-byte CSI on some terminals);
# bidirectional overrides, embeddings, isolates and marks; the line and paragraph separators.
_TERMINAL_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e\u2066-\u2069]")


def _escape_char(m: re.Match) -> str:
    c = m.group(0)
    return f"\\x{ord(c):02x}" if ord(c) < 0x20 else f"\\u{ord(c):04x}"


def terminal_text(value: Any) -> str:
    """Text for a terminal: control and bidirectional characters shown escaped, everything else literal.

    Escape sequences (clear screen, window title, hidden hyperlinks, bell) and a
    right-to-left override in library text would otherwise act on the terminal.
    C0 controls become ``\\xNN``; DEL, C1 controls and bidi characters ``\\uNNNN``, which is
    also the JSON spelling of the same character, so ``--json`` output stays valid JSON with
    the same content. Tab and line feed are kept.

    >>> terminal_text("\x1b]0;pwned\x07limonene\u202e")
    '\\\\x1b]0;pwned\\\\x07limonene\\\\u202e'
    >>> terminal_text("α-pinene")
    'α-pinene'
    """
    return _TERMINAL_UNSAFE.sub(_escape_char, str(value))


def xml_text(value: str) -> str:
    """Text with the characters XML 1.0 cannot hold replaced by U+FFFD (visible), otherwise literal.

    >>> xml_text("bad\x1b[2Jname") == "bad\ufffd[2Jname"
    True
    """
    return _XML_ILLEGAL.sub("\ufffd", value)


def html_text(value: Any) -> str:
    """Any value as HTML-escaped text (``None`` and NaN become empty), safe in tags and attributes."""
    if value is None:
        return ""
    if isinstance(value, float) and value != value:
        return ""
    return html.escape(terminal_text(value), quote=True)  # control and bidi characters shown, not obeyed
