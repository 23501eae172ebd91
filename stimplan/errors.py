"""The exception family of stimplan.

Every error that stimplan raises on bad input is a :class:`StimplanError`.
It carries the path of the offending field (``"slm.pitch_um"``,
``"steps[3].pulse_ms"``), the value that was given and a description of what
is allowed, so that the command line and the GUI can show one precise line.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = [
    "StimplanError",
    "ConfigError",
    "InputFileError",
    "ExposureLimitError",
    "ExportError",
    "IntegrityError",
]


class StimplanError(Exception):
    """Base class of all errors raised by stimplan.

    Parameters
    ----------
    field : str
        Path of the offending field, e.g. ``"slm.pitch_um"``.
    value : object
        The value that was given.
    allowed : str
        What would have been accepted, e.g. ``"> 0"`` or ``"in (0, 1]"``.
    detail : str, optional
        Extra explanation.
    line : int, optional
        Line number in a source file, where known.
    """

    def __init__(
        self,
        field: str,
        value: Any = None,
        allowed: str = "",
        detail: str = "",
        line: int | None = None,
    ) -> None:
        self.field = field
        self.value = value
        self.allowed = allowed
        self.detail = detail
        self.line = line
        super().__init__(self._message())

    def _message(self) -> str:
        parts = [f"{self.field}"]
        if self.line is not None:
            parts[0] += f" (line {self.line})"
        shown = _short_repr(self.value)
        if shown is not None:
            parts.append(f"= {shown}")
        msg = " ".join(parts)
        if self.allowed:
            msg += f": allowed {self.allowed}"
        if self.detail:
            msg += f" ({self.detail})" if self.allowed else f": {self.detail}"
        return msg


class ConfigError(StimplanError, ValueError):
    """A configuration value is missing, of the wrong type or out of range."""


class InputFileError(StimplanError, OSError):
    """An input file cannot be read or does not hold what it should."""


class ExposureLimitError(StimplanError):
    """An operation was refused because the exposure estimate is above a limit."""


class ExportError(StimplanError):
    """An export cannot be written (e.g. the target exists and no force flag)."""


class IntegrityError(StimplanError):
    """A file of an export does not match the checksum in its manifest."""


def _short_repr(value: Any) -> str | None:
    if value is None:
        return None
    try:
        import numpy as np

        if isinstance(value, np.ndarray):
            return f"array(shape={value.shape}, dtype={value.dtype})"
    except ImportError:  # pragma: no cover - numpy is a hard dependency
        pass
    try:
        text = repr(value)
    except (ValueError, RecursionError):  # an integer of thousands of digits, deep nesting
        text = _unprintable(value)
    if len(text) > 80:
        text = text[:77] + "..."
    return text


def _unprintable(value: Any) -> str:
    """A short description of a value that ``repr`` refuses."""
    if isinstance(value, int):
        digits = int(abs(value).bit_length() * math.log10(2)) + 1
        return f"<integer of about {digits} digits>"
    return f"<{type(value).__name__} nested too deep to show>"
