"""One exception type for bad input, so every layer reports it the same way."""

from __future__ import annotations

from typing import Any


class InputError(ValueError):
    """Input outside what the engine accepts.

    The message always names the field, the value given and the accepted range, so the command
    line and the dashboard can show it as is, without a traceback.

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
        shown = repr(value) if not isinstance(value, str) else f"'{value}'"
        if len(shown) > 80:
            shown = shown[:77] + "..."
        super().__init__(f"{field} = {shown} is not accepted; expected {accepted}")
