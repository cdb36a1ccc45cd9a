"""One exception type for bad input, so every layer reports it the same way."""

from __future__ import annotations

import reprlib
import unicodedata
from typing import Any

MAX_VALUE_CHARS = 120
"""A value is shown with at most this many characters in a message (then ``...``)."""
MAX_FIELD_CHARS = 120
MAX_ACCEPTED_CHARS = 400
"""What is accepted is cut here: a list of every known key stays readable, a runaway one does
not fill a screen (or a log) with tens of kilobytes."""

# Values from users can be anything TOML or a form holds: strings of megabytes, tables nested a
# thousand deep (whose plain repr would exceed the recursion limit). reprlib bounds both.
_REPR = reprlib.Repr()
_REPR.maxlevel = 3
_REPR.maxstring = MAX_VALUE_CHARS
_REPR.maxother = MAX_VALUE_CHARS
_REPR.maxlong = 40
for _name in ("maxdict", "maxlist", "maxtuple", "maxset", "maxfrozenset"):
    setattr(_REPR, _name, 6)


_BIDI_CONTROLS = frozenset(
    "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069"
)


def has_control_characters(text: str, *, allow_breaks: bool = False) -> bool:
    """Whether ``text`` holds a control character (C0, DEL, C1) or a bidirectional override.

    Such characters break the one-line places names and titles go (CSV headers, OEM comments,
    TOML strings, messages) or make them display as something else. ``allow_breaks`` lets line
    breaks and tabs through (free-text descriptions).
    """
    for char in text:
        code = ord(char)
        if code < 32 or 127 <= code < 160:
            if allow_breaks and char in "\n\r\t":
                continue
            return True
        if char in _BIDI_CONTROLS:
            return True
    return False


def one_line(text: str, limit: int) -> str:
    """``text`` on one line of at most ``limit`` characters: control characters (newlines, NUL,
    escapes, bidirectional overrides) are shown escaped, never acted on."""
    out = []
    size = 0
    for char in text:
        if char.isprintable() or char == " ":
            piece = char
        elif unicodedata.category(char) == "Zs":
            piece = " "
        else:
            piece = char.encode("unicode_escape").decode("ascii")
        out.append(piece)
        size += len(piece)
        if size > limit:
            break
    shown = "".join(out)
    return shown if len(shown) <= limit else shown[: limit - 3] + "..."


def shown_value(value: Any) -> str:
    """A value as a message shows it: quoted text, or a bounded repr; one line, cut to length."""
    if isinstance(value, str):
        return "'" + one_line(value, MAX_VALUE_CHARS - 2) + "'"
    try:
        text = _REPR.repr(value)
    except Exception:  # a value whose repr fails must not turn a refusal into a crash
        text = f"<{type(value).__name__}>"
    return one_line(text, MAX_VALUE_CHARS)


class InputError(ValueError):
    """Input outside what the engine accepts.

    The message always names the field, the value given and the accepted range, so the command
    line and the dashboard can show it as is, without a traceback. It is one line of bounded
    length whatever the input: control characters are escaped and long parts are cut.

    Parameters
    ----------
    field : str
        Name of the offending field as the user wrote it (``"r1_km"``, ``"window.arrival_end"``).
    value : Any
        The value that was given.
    accepted : str
        What is accepted, in plain words (``"> 0 s"``, ``"1800-01-01 to 2200-01-01"``).
    """

    def __init__(self, field: str, value: Any, accepted: str) -> None:
        self.field = field
        self.value = value
        self.accepted = accepted
        super().__init__(
            f"{one_line(str(field), MAX_FIELD_CHARS)} = {shown_value(value)} is not accepted; "
            f"expected {one_line(str(accepted), MAX_ACCEPTED_CHARS)}"
        )
