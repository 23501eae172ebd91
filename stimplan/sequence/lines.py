"""Where a key path of a sequence file is written: its line, for error messages.

TOML line mapping: the standard library reads TOML without positions, so the
lines of keys are found from the text.
"""

from __future__ import annotations

import re
import tomllib
from collections.abc import Mapping

from ..errors import ConfigError
from .keys import (
    MAX_DOTS_PER_LINE,
    MAX_NESTING,
)

__all__ = ["key_parts", "LineIndex", "dotted_line", "nested_line", "syntax_error"]


_KEY_ATOM = r"(?:[A-Za-z0-9_-]+|\"(?:[^\"\\]|\\.)*\"|'[^']*')"


_KEY_PART = re.compile(_KEY_ATOM)


_KEY_LINE = re.compile(rf"^\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*=(.*)$")


_ARRAY_HEADER = re.compile(rf"^\s*\[\[\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*\]\]")


_TABLE_HEADER = re.compile(rf"^\s*\[\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*\]")


_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")


# Parts of a dotted key that the line index records (deeper keys are refused anyway).
_MAX_INDEXED_PARTS = 32


_LAST_PART = re.compile(r"(\.[^.\[\]]*|\[\d*\])$")


def key_parts(text: str) -> list[str]:
    out = []
    for m in _KEY_PART.finditer(text):
        s = m.group(0)
        out.append(s[1:-1] if s[0] in "\"'" else s)
    return out


class LineIndex:
    """Best-effort map from key paths (``steps[2].pulse_ms``) to line numbers.

    The text is scanned line by line for table headers, array-of-table
    headers and ``key = value`` lines; multi-line strings are skipped. It
    does not parse TOML (``tomllib`` does that); it only finds where a key
    was written.
    """

    def __init__(self, text: str) -> None:
        self.lines: dict[str, int] = {}
        self.headers: list[tuple[int, str]] = []
        counts: dict[str, int] = {}
        table = ""
        in_string: str | None = None
        for no, line in enumerate(text.splitlines(), start=1):
            if in_string is not None:
                if line.count(in_string) % 2 == 1:
                    in_string = None
                continue
            m = _ARRAY_HEADER.match(line)
            if m:
                name = ".".join(key_parts(m.group(1)))
                counts[name] = counts.get(name, 0) + 1
                table = f"{name}[{counts[name] - 1}]"
                self._add(table, no)
                self.headers.append((no, table))
                continue
            m = _TABLE_HEADER.match(line)
            if m:
                table = _with_indices(".".join(key_parts(m.group(1))), counts)
                self._add(table, no)
                self.headers.append((no, table))
                continue
            m = _KEY_LINE.match(line)
            if m:
                parts = key_parts(m.group(1))
                prefix = table
                for p in parts[:_MAX_INDEXED_PARTS]:
                    prefix = f"{prefix}.{p}" if prefix else p
                    self._add(prefix, no)
                rest = m.group(2)
                for quote in ('"""', "'''"):
                    if rest.count(quote) % 2 == 1:
                        in_string = quote
                        break

    def _add(self, path: str, no: int) -> None:
        self.lines.setdefault(path, no)

    def find(self, path: str) -> int | None:
        """Line of ``path`` or of its nearest enclosing key or table."""
        p = path
        while p:
            if p in self.lines:
                return self.lines[p]
            shorter = _LAST_PART.sub("", p)
            if shorter == p:
                break
            p = shorter
        return None

    def table_at(self, line: int) -> str:
        """The table that ``line`` belongs to (``""`` for the top level)."""
        current = ""
        for no, name in self.headers:
            if no > line:
                break
            current = name
        return current


_STRING_LITERAL = re.compile(r'"(?:[^"\\]|\\.)*"' + r"|'[^']*'")


def dotted_line(text: str) -> tuple[int, int] | None:
    """``(line, count)`` of the first line with more than :data:`MAX_DOTS_PER_LINE` dots."""
    if text.count(".") <= MAX_DOTS_PER_LINE:
        return None
    for no, line in enumerate(text.splitlines(), start=1):
        if line.count(".") > MAX_DOTS_PER_LINE:
            n = _STRING_LITERAL.sub("", line).count(".")
            if n > MAX_DOTS_PER_LINE:
                return no, n
    return None


# Strings and comments (skipped), and the brackets and braces that open or close a value.
_NESTING_TOKEN = re.compile(
    r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'|#[^\n]*|[\[\]{}]'
)


def nested_line(text: str) -> tuple[int, int] | None:
    """``(line, depth)`` where arrays and inline tables first nest deeper than
    :data:`MAX_NESTING` (brackets and braces outside strings and comments), else None."""
    if text.count("[") + text.count("{") <= MAX_NESTING:
        return None
    depth = 0
    for m in _NESTING_TOKEN.finditer(text):
        tok = m.group(0)
        if tok in ("[", "{"):
            depth += 1
            if depth > MAX_NESTING:
                return text.count("\n", 0, m.start()) + 1, depth
        elif tok in ("]", "}"):
            depth = max(depth - 1, 0)
    return None


def _with_indices(name: str, counts: Mapping[str, int]) -> str:
    """Put the current array-of-tables index into a header name (``steps.x`` -> ``steps[2].x``)."""
    for arr in sorted(counts, key=len, reverse=True):
        if name == arr or name.startswith(arr + "."):
            return f"{arr}[{counts[arr] - 1}]{name[len(arr) :]}"
    return name


def syntax_error(exc: tomllib.TOMLDecodeError, text: str, index: LineIndex) -> ConfigError:
    msg = str(exc)
    m = _TOML_POSITION.search(msg)
    if m:
        line, col = int(m.group(1)), int(m.group(2))
        what = msg[: m.start()].strip()
        detail = f"{what} at column {col}"
    else:
        line = max(1, text.count("\n") + (0 if text.endswith("\n") else 1))
        detail = msg
    table = index.table_at(line) or "sequence"
    return ConfigError(table, None, "valid TOML", f"syntax error: {detail}", line=line)
