"""Collecting every error of a sequence file at once, each with its key path and line."""

from __future__ import annotations

import json
import re
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from ..errors import ConfigError, StimplanError
from .keys import (
    MAX_LISTED_ERRORS,
    NAME_RE,
)
from .lines import LineIndex
from .schema import schema_errors

__all__ = [
    "SequenceError",
    "ErrorReport",
    "key_text",
    "path_text",
    "rebase_path",
    "build_collecting",
]


class SequenceError(ConfigError):
    """A sequence file has one or more errors; all of them are listed.

    Parameters
    ----------
    errors : sequence of ConfigError
        The errors, each with its key path, value, allowed range and line.
    source : str, optional
        The file (for the message).

    Attributes
    ----------
    errors : list of ConfigError
    source : str or None

    Notes
    -----
    ``field``, ``value``, ``allowed``, ``detail`` and ``line`` are those of
    the first error, so that a one-line report can show it; ``str(exc)``
    lists every error, one per line.
    """

    def __init__(self, errors: Sequence[ConfigError], source: str | None = None) -> None:
        self.errors = list(errors) or [ConfigError("sequence", None, "", "invalid")]
        self.source = source
        first = self.errors[0]
        super().__init__(first.field, first.value, first.allowed, first.detail, line=first.line)

    def _message(self) -> str:
        n = len(self.errors)
        where = f"sequence file {self.source!r}" if self.source else "sequence"
        head = f"{where}: {n} error{'s' if n != 1 else ''}"
        lines = [f"  {e}" for e in self.errors[:MAX_LISTED_ERRORS]]
        if n > MAX_LISTED_ERRORS:
            lines.append(f"  ... and {n - MAX_LISTED_ERRORS} more")
        return "\n".join([head, *lines])

    def __reduce__(self) -> tuple[Any, ...]:
        return (type(self), (self.errors, self.source))


class ErrorReport:
    """Collects the errors of one file, each with its line where it can be found."""

    def __init__(self, index: LineIndex | None) -> None:
        self.index = index
        self.errors: list[ConfigError] = []
        self.refused: set[str] = set()

    def line(self, path: str) -> int | None:
        return self.index.find(path) if self.index is not None else None

    def add(self, path: str, value: Any = None, allowed: str = "", detail: str = "") -> None:
        self.errors.append(ConfigError(path, value, allowed, detail, line=self.line(path)))

    def add_exc(self, exc: StimplanError, path: str) -> None:
        line = exc.line if exc.line is not None else self.line(path)
        self.errors.append(ConfigError(path, exc.value, exc.allowed, exc.detail, line=line))

    def add_unexpected(self, path: str, exc: BaseException) -> None:
        self.add(path, None, "", f"cannot be used ({type(exc).__name__}: {exc})")

    def check_schema(self, raw: Mapping[str, Any]) -> None:
        """Record every problem the schema finds (:func:`.schema.schema_errors`).

        The key paths of refused values are kept, so that building the
        sections leaves those values out and reports each problem once.
        """
        for issue in schema_errors(raw):
            path = path_text(issue.parts)
            self.add(path, issue.value, issue.allowed, issue.detail)
            self.refused.add(path)

    def has_refused(self, path: str) -> bool:
        """Whether the schema refused ``path`` or anything inside it."""
        return any(r == path or r.startswith((path + ".", path + "[")) for r in self.refused)

    def usable(self, table: Mapping[str, Any], path: str) -> dict[str, Any]:
        """The entries of a table that the schema did not refuse."""
        return {
            k: v
            for k, v in table.items()
            if isinstance(k, str) and not self.has_refused(f"{path}.{key_text(k)}")
        }

    def table(self, parent: Mapping[str, Any], key: str, path: str) -> dict[str, Any] | None:
        """``parent[key]`` as a table: ``{}`` when absent, ``None`` when refused."""
        if key not in parent:
            return {}
        val = parent[key]
        if path in self.refused:
            return None
        if not isinstance(val, dict):
            self.add(path, val, "a table")
            return None
        return val


def path_text(parts: Sequence[Any]) -> str:
    """A key path from its parts: ``("steps", 2, "pulse_ms")`` -> ``steps[2].pulse_ms``."""
    out = ""
    for p in parts:
        if isinstance(p, int) and not isinstance(p, bool):
            out += f"[{p}]"
        else:
            name = key_text(p)
            out = f"{out}.{name}" if out else name
    return out


def key_text(key: Any) -> str:
    """A key as written in a key path: bare when TOML allows it, else quoted (``"a b"``)."""
    text = str(key)
    return text if NAME_RE.fullmatch(text) else json.dumps(text, ensure_ascii=False)


def rebase_path(path: str, old: str, new: str) -> str:
    """Replace the leading component ``old`` of ``path`` by ``new`` (or prefix ``new``)."""
    if path == old or path.startswith((old + ".", old + "[")):
        return new + path[len(old) :]
    return f"{new}.{path}" if new else path


def build_collecting(
    report: ErrorReport,
    make: Callable[..., Any],
    kwargs: dict[str, Any],
    path: str,
    remap: Callable[[str], str],
    *,
    retry: bool = True,
    keep: Sequence[str] = (),
    dropped: bool = False,
) -> Any:
    """``make(**kwargs)``, recording every error.

    With ``retry``, a key that an error names is dropped (back to its
    default) and the construction repeated, so that the errors of the other
    keys are found too; keys in ``keep`` (selectors such as ``preset``) stop
    the retries, and so does an error that names no given key once a key has
    been dropped (it would most likely follow from the drop). ``dropped``
    says that the schema has already left keys out. Returns ``None`` when
    anything was wrong.
    """
    kw = dict(kwargs)
    failed = dropped
    for _ in range(len(kw) + 1):
        try:
            obj = make(**kw)
        except StimplanError as exc:
            where = remap(exc.field)
            key = where[len(path) + 1 :] if where.startswith(path + ".") else ""
            key = re.split(r"[.\[]", key, maxsplit=1)[0]
            if failed and key not in kw:
                # after a key was dropped, an error that names no given key is
                # most likely a consequence of the drop: not reported
                return None
            report.add_exc(exc, where)
            failed = True
            if not retry or key not in kw or key in keep:
                return None
            del kw[key]
            continue
        except Exception as exc:  # anything else is reported, never raised
            report.add_unexpected(path, exc)
            return None
        return None if failed else obj
    return None
