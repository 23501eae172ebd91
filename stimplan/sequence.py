"""The sequence file: parsing, validation and expansion into a timeline.

A sequence file is a TOML document (``format = "stimplan-sequence/1"``) that
names the optical system, the eye, the implant, the hologram settings, a set
of named stimuli and an ordered list of steps. :func:`load_sequence` and
:func:`parse_sequence` turn it into a validated :class:`SequenceSpec` with
physical units; :func:`expand_timeline` turns that into frames
(:class:`FrameSpec`) in time order, each with its train of light pulses.
The keys are described in ``docs/sequence-format.md``.

Validation collects every problem it finds and raises one
:class:`SequenceError` that lists them all, each with its key path
(``steps[3].pulse_ms``), the value, what is allowed and, where it can be
found, the line of the file.

Timeline rules
    Steps run in file order, or shuffled from ``seed`` (a fresh permutation
    for each whole-sequence repeat). A step runs ``repeat`` times, each
    repetition followed by a dark pause of ``blank_after_ms`` (a frame with
    no stimulus and no pulses). An alternating step is cut into frames of
    ``alternate_ms`` that show the two stimuli in turn; the last frame is
    cut to fit the step. Every frame starts its own pulse train at its start
    time, with pulses of ``pulse_ms`` every ``1000 / rate_hz`` ms; a pulse
    that would run past the frame's end is cut at the end.

References
----------
.. [1] TOML v1.0.0, https://toml.io/en/v1.0.0 (the file syntax; read with
   the standard library's :mod:`tomllib`).
.. [2] J. V. Odom et al., "ISCEV standard for clinical visual evoked
   potentials (2016 update)", *Doc. Ophthalmol.* 133, 1 (2016)
   (pattern reversal: the two phases of a checkerboard alternate).
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import tomllib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import _validate as v
from .baseline import MASK_PRESETS, AmplitudeMask
from .errors import ConfigError, StimplanError
from .exposure import ProtocolCap, Pulse, check_wavelength
from .eye import EYE_PRESETS, eye_preset
from .holography.ifta import IftaSettings
from .implant import IMPLANT_PRESETS, Implant, implant_preset
from .stimuli.base import STIMULUS_KINDS, Stimulus
from .stimuli.registry import stimulus_from_dict
from .system import SLM, Eye, Illumination, OpticalSystem, Relay

__all__ = [
    "FORMAT",
    "MAX_FILE_BYTES",
    "MAX_FRAMES",
    "MAX_PULSES",
    "SequenceError",
    "SequenceSpec",
    "StepSpec",
    "FrameSpec",
    "load_sequence",
    "parse_sequence",
    "sequence_from_dict",
    "step_order",
    "timeline_counts",
    "expand_timeline",
    "total_duration_ms",
]

#: The value of the required ``format`` key.
FORMAT = "stimplan-sequence/1"
#: Largest sequence file accepted, bytes (1 MiB).
MAX_FILE_BYTES = 1 << 20
#: Largest number of frames of an expanded timeline.
MAX_FRAMES = 100_000
#: Largest number of light pulses of an expanded timeline.
MAX_PULSES = 10_000_000
#: How a target irradiance is read over the ON implant pixels.
IRRADIANCE_BASES = ("mean", "min")
#: Suffixes that name the partner of a stimulus (``"checks:reversed"``).
PARTNER_SUFFIXES = ("reversed", "inverted")
#: Most errors listed in one message (all are kept in ``SequenceError.errors``).
MAX_LISTED_ERRORS = 200
#: Most ``.`` outside strings on one line. Deeply dotted keys cost the TOML
#: reader time quadratic in their depth; no sequence needs more than a few.
MAX_DOTS_PER_LINE = 256

_SEED_MAX = 2**63 - 1
_NAME_RE = re.compile(r"[A-Za-z0-9_-]+")
# Fraction of a period (or of a frame) below which a left-over piece is dropped
# as floating-point rounding rather than counted as one more pulse or frame.
_PIECE_TOL = 1e-9


def _field_names(cls: type) -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(cls))


_TOP_KEYS = (
    "format",
    "title",
    "seed",
    "optics",
    "eye",
    "implant",
    "hologram",
    "mask",
    "limits",
    "order",
    "stimuli",
    "steps",
)
_OPTICS_KEYS = ("slm", "laser", "relay")
_SLM_KEYS = (*_field_names(SLM), "bit_depth")
_LASER_KEYS = _field_names(Illumination)
_RELAY_KEYS = _field_names(Relay)
_EYE_KEYS = ("preset", "um_per_deg", "focal_length_mm", "pupil_diameter_mm", "transmission", "name")
_IMPLANT_KEYS = ("preset", *_field_names(Implant))
_IFTA_KEYS = (
    "method",
    "iterations",
    "mraf_mix",
    "initial",
    "quantized_iterations",
    "window_margin_samples",
    "group_gain",
)
_HOLOGRAM_KEYS = (*_IFTA_KEYS, "implant_aware", "oversample", "offset_um", "on_threshold")
_MASK_KEYS = ("kind", "efficiency", "contrast_ratio", "field_width_um", "field_height_um")
_LIMITS_KEYS = _field_names(ProtocolCap)
_ORDER_KEYS = ("shuffle", "repeats")
_STEP_KEYS = (
    "stimulus",
    "alternate",
    "alternate_ms",
    "duration_ms",
    "pulse_ms",
    "rate_hz",
    "power_mw",
    "irradiance_mw_per_mm2",
    "irradiance_basis",
    "repeat",
    "blank_after_ms",
)
_STEP_REQUIRED = ("duration_ms", "pulse_ms", "rate_hz")


# -- the error ---------------------------------------------------------------


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


# -- finding the line of a key ---------------------------------------------------

_KEY_ATOM = r"(?:[A-Za-z0-9_-]+|\"(?:[^\"\\]|\\.)*\"|'[^']*')"
_KEY_PART = re.compile(_KEY_ATOM)
_KEY_LINE = re.compile(rf"^\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*=(.*)$")
_ARRAY_HEADER = re.compile(rf"^\s*\[\[\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*\]\]")
_TABLE_HEADER = re.compile(rf"^\s*\[\s*({_KEY_ATOM}(?:\s*\.\s*{_KEY_ATOM})*)\s*\]")
_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")
# Parts of a dotted key that the line index records (deeper keys are refused anyway).
_MAX_INDEXED_PARTS = 32
_LAST_PART = re.compile(r"(\.[^.\[\]]*|\[\d*\])$")


def _key_parts(text: str) -> list[str]:
    out = []
    for m in _KEY_PART.finditer(text):
        s = m.group(0)
        out.append(s[1:-1] if s[0] in "\"'" else s)
    return out


class _LineIndex:
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
                name = ".".join(_key_parts(m.group(1)))
                counts[name] = counts.get(name, 0) + 1
                table = f"{name}[{counts[name] - 1}]"
                self._add(table, no)
                self.headers.append((no, table))
                continue
            m = _TABLE_HEADER.match(line)
            if m:
                table = _with_indices(".".join(_key_parts(m.group(1))), counts)
                self._add(table, no)
                self.headers.append((no, table))
                continue
            m = _KEY_LINE.match(line)
            if m:
                parts = _key_parts(m.group(1))
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


def _dotted_line(text: str) -> tuple[int, int] | None:
    """``(line, count)`` of the first line with more than :data:`MAX_DOTS_PER_LINE` dots."""
    if text.count(".") <= MAX_DOTS_PER_LINE:
        return None
    for no, line in enumerate(text.splitlines(), start=1):
        if line.count(".") > MAX_DOTS_PER_LINE:
            n = _STRING_LITERAL.sub("", line).count(".")
            if n > MAX_DOTS_PER_LINE:
                return no, n
    return None


def _with_indices(name: str, counts: Mapping[str, int]) -> str:
    """Put the current array-of-tables index into a header name (``steps.x`` -> ``steps[2].x``)."""
    for arr in sorted(counts, key=len, reverse=True):
        if name == arr or name.startswith(arr + "."):
            return f"{arr}[{counts[arr] - 1}]{name[len(arr) :]}"
    return name


# -- the error collector ---------------------------------------------------------


class _Report:
    """Collects the errors of one file, each with its line where it can be found."""

    def __init__(self, index: _LineIndex | None) -> None:
        self.index = index
        self.errors: list[ConfigError] = []

    def line(self, path: str) -> int | None:
        return self.index.find(path) if self.index is not None else None

    def add(self, path: str, value: Any = None, allowed: str = "", detail: str = "") -> None:
        self.errors.append(ConfigError(path, value, allowed, detail, line=self.line(path)))

    def add_exc(self, exc: StimplanError, path: str) -> None:
        line = exc.line if exc.line is not None else self.line(path)
        self.errors.append(ConfigError(path, exc.value, exc.allowed, exc.detail, line=line))

    def add_unexpected(self, path: str, exc: BaseException) -> None:
        self.add(path, None, "", f"cannot be used ({type(exc).__name__}: {exc})")

    def unknown_keys(self, table: Mapping[str, Any], path: str, allowed: Sequence[str]) -> None:
        for key in table:
            if key not in allowed:
                self.add(
                    f"{path}.{key}" if path else str(key),
                    table[key],
                    "a key among " + ", ".join(allowed),
                    "unknown key",
                )

    def table(self, parent: Mapping[str, Any], key: str, path: str) -> dict[str, Any] | None:
        """``parent[key]`` as a table: ``{}`` when absent, ``None`` (error) when not a table."""
        if key not in parent:
            return {}
        val = parent[key]
        if not isinstance(val, dict):
            self.add(path, val, "a table")
            return None
        return val


def _rebase(path: str, old: str, new: str) -> str:
    """Replace the leading component ``old`` of ``path`` by ``new`` (or prefix ``new``)."""
    if path == old or path.startswith((old + ".", old + "[")):
        return new + path[len(old) :]
    return f"{new}.{path}" if new else path


def _build(
    report: _Report,
    make: Callable[..., Any],
    kwargs: dict[str, Any],
    path: str,
    remap: Callable[[str], str],
    *,
    retry: bool = True,
    keep: Sequence[str] = (),
) -> Any:
    """``make(**kwargs)``, recording every error.

    With ``retry``, a key that an error names is dropped (back to its
    default) and the construction repeated, so that the errors of the other
    keys are found too; keys in ``keep`` (selectors such as ``preset``) stop
    the retries, and so does an error that names no given key once a key has
    been dropped (it would most likely follow from the drop). Returns
    ``None`` when anything was wrong.
    """
    kw = dict(kwargs)
    failed = False
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


def _resolve_path(value: Any, base_dir: Path | None) -> Any:
    """A relative file path joined to ``base_dir``; anything else unchanged."""
    if not isinstance(value, str) or not value or base_dir is None or "\x00" in value:
        return value
    p = Path(value)
    return value if p.is_absolute() else str(base_dir / p)


# -- sections --------------------------------------------------------------------


def _make_slm(**kw: Any) -> SLM:
    if "bit_depth" in kw:
        if "phase_levels" in kw:
            raise ConfigError(
                "slm.bit_depth", kw["bit_depth"], "either bit_depth or phase_levels, not both"
            )
        bits = kw.pop("bit_depth")
        return SLM.from_bit_depth(bits, **kw)
    return SLM(**kw)


def _make_eye(**kw: Any) -> Eye:
    preset = kw.pop("preset", None)
    fl = kw.pop("focal_length_mm", None)
    if "name" in kw and not isinstance(kw["name"], str):
        raise ConfigError("eye.name", kw["name"], "a string")
    if fl is not None:
        if "um_per_deg" in kw:
            raise ConfigError(
                "eye.focal_length_mm", fl, "either um_per_deg or focal_length_mm, not both"
            )
        kw["um_per_deg"] = v.number("eye.focal_length_mm", fl, lo=0, lo_open=True) * (
            1e3 * math.pi / 180.0
        )
    if preset is not None:
        if not isinstance(preset, str):
            raise ConfigError("eye.preset", preset, "one of " + ", ".join(map(repr, EYE_PRESETS)))
        return eye_preset(preset, **kw)
    if "um_per_deg" not in kw:
        raise ConfigError(
            "eye.um_per_deg",
            None,
            "um_per_deg or focal_length_mm when no preset is given",
            "or preset = " + " | ".join(map(repr, EYE_PRESETS)),
        )
    return Eye(**kw)


def _make_implant(**kw: Any) -> Implant:
    preset = kw.pop("preset", None)
    if preset is not None:
        if not isinstance(preset, str) or preset not in IMPLANT_PRESETS:
            raise ConfigError(
                "implant.preset", preset, "one of " + ", ".join(map(repr, IMPLANT_PRESETS))
            )
        return implant_preset(preset, **kw)
    if "pitch_um" not in kw:
        raise ConfigError(
            "implant.pitch_um",
            None,
            "> 0 (µm)",
            "missing; give the Implant fields or preset = "
            + " | ".join(map(repr, IMPLANT_PRESETS)),
        )
    return Implant(**kw)


def _make_mask(**kw: Any) -> AmplitudeMask:
    kind = v.choice("mask.kind", kw.pop("kind", "lcd"), tuple(MASK_PRESETS))
    return dataclasses.replace(MASK_PRESETS[kind], **kw)


def _make_limits(**kw: Any) -> ProtocolCap:
    for name in ("name", "source"):
        if name in kw and not isinstance(kw[name], str):
            raise ConfigError(f"protocol.{name}", kw[name], "a string")
    return ProtocolCap(**kw)


def _optics(report: _Report, raw: Mapping[str, Any], base_dir: Path | None) -> tuple[Any, ...]:
    optics = report.table(raw, "optics", "optics")
    if optics is None:
        return None, None, None
    report.unknown_keys(optics, "optics", _OPTICS_KEYS)
    out = []
    for key, cls_keys, make, old in (
        ("slm", _SLM_KEYS, _make_slm, "slm"),
        ("laser", _LASER_KEYS, Illumination, "illumination"),
        ("relay", _RELAY_KEYS, Relay, "relay"),
    ):
        path = f"optics.{key}"
        tbl = report.table(optics, key, path)
        if tbl is None:
            out.append(None)
            continue
        report.unknown_keys(tbl, path, cls_keys)
        kw = {k: val for k, val in tbl.items() if k in cls_keys}
        for fkey in ("lut_file", "amplitude_file", "correction_phase_file"):
            if fkey in kw:
                kw[fkey] = _resolve_path(kw[fkey], base_dir)
        out.append(_build(report, make, kw, path, lambda f, o=old, p=path: _rebase(f, o, p)))
    return tuple(out)


def _eye(report: _Report, raw: Mapping[str, Any]) -> Eye | None:
    if "eye" not in raw:
        report.add(
            "eye",
            None,
            "a table with preset = " + " | ".join(map(repr, EYE_PRESETS)) + " or um_per_deg",
            "missing",
        )
        return None
    tbl = report.table(raw, "eye", "eye")
    if tbl is None:
        return None
    report.unknown_keys(tbl, "eye", _EYE_KEYS)
    kw = {k: val for k, val in tbl.items() if k in _EYE_KEYS}
    return _build(
        report, _make_eye, kw, "eye", lambda f: _rebase(f, "eye", "eye"), keep=("preset",)
    )


def _implant(report: _Report, raw: Mapping[str, Any]) -> tuple[Implant | None, bool]:
    """The implant (or None) and whether the section was given."""
    if "implant" not in raw:
        return None, False
    tbl = report.table(raw, "implant", "implant")
    if tbl is None:
        return None, True
    report.unknown_keys(tbl, "implant", _IMPLANT_KEYS)
    kw = {k: val for k, val in tbl.items() if k in _IMPLANT_KEYS}
    imp = _build(
        report,
        _make_implant,
        kw,
        "implant",
        lambda f: _rebase(f, "implant", "implant"),
        retry=False,
    )
    return imp, True


def _hologram(
    report: _Report, raw: Mapping[str, Any], seed: int, has_implant: bool
) -> dict[str, Any]:
    out: dict[str, Any] = {
        "ifta": None,
        "implant_aware": has_implant,
        "oversample": 2,
        "offset_um": (0.0, 0.0),
        "on_threshold": 0.5,
    }
    tbl = report.table(raw, "hologram", "hologram")
    if tbl is None:
        return out
    report.unknown_keys(tbl, "hologram", _HOLOGRAM_KEYS)

    def check(key: str, fn: Callable[[str, Any], Any]) -> None:
        if key in tbl:
            try:
                out[key] = fn(f"hologram.{key}", tbl[key])
            except StimplanError as exc:
                report.add_exc(exc, exc.field)
            except Exception as exc:
                report.add_unexpected(f"hologram.{key}", exc)

    check("implant_aware", v.boolean)
    check("oversample", lambda f, x: v.integer(f, x, lo=2, hi=8))
    check("on_threshold", lambda f, x: v.number(f, x, lo=0, hi=1, lo_open=True))
    check("offset_um", _pair_um)
    if out["implant_aware"] and not has_implant:
        report.add(
            "hologram.implant_aware", True, "false without an [implant]", "nothing to be aware of"
        )
    kw = {k: val for k, val in tbl.items() if k in _IFTA_KEYS}
    aware = bool(out["implant_aware"]) and has_implant

    def make(**kw: Any) -> IftaSettings:
        return IftaSettings(seed=seed, group_weighting=aware, **kw)

    out["ifta"] = _build(report, make, kw, "hologram", lambda f: _rebase(f, "hologram", "hologram"))
    return out


def _pair_um(path: str, value: Any) -> tuple[float, float]:
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise ConfigError(path, value, "a pair [x, y] of numbers (µm)")
    return (v.number(f"{path}[0]", value[0]), v.number(f"{path}[1]", value[1]))


def _section(
    report: _Report,
    raw: Mapping[str, Any],
    key: str,
    keys: Sequence[str],
    make: Callable[..., Any],
    old: str,
    *,
    keep: Sequence[str] = (),
) -> Any:
    """A table given straight to a constructor (``mask``, ``limits``)."""
    tbl = report.table(raw, key, key)
    if tbl is None:
        return None
    report.unknown_keys(tbl, key, keys)
    kw = {k: val for k, val in tbl.items() if k in keys}
    return _build(report, make, kw, key, lambda f: _rebase(f, old, key), keep=keep)


def _order(report: _Report, raw: Mapping[str, Any]) -> tuple[bool, int]:
    shuffle, repeats = False, 1
    tbl = report.table(raw, "order", "order")
    if not tbl:
        return shuffle, repeats
    report.unknown_keys(tbl, "order", _ORDER_KEYS)
    try:
        if "shuffle" in tbl:
            shuffle = v.boolean("order.shuffle", tbl["shuffle"])
    except ConfigError as exc:
        report.add_exc(exc, exc.field)
    try:
        if "repeats" in tbl:
            repeats = v.integer("order.repeats", tbl["repeats"], lo=1, hi=MAX_FRAMES)
    except ConfigError as exc:
        report.add_exc(exc, exc.field)
    return shuffle, repeats


# -- stimuli ------------------------------------------------------------------------


def _stimulus_path(field_: str, name: str) -> str:
    """``grating.bar_width_px`` -> ``stimuli.<name>.bar_width_px``."""
    head = re.split(r"[.\[]", field_, maxsplit=1)[0]
    base = f"stimuli.{name}"
    if head in STIMULUS_KINDS or head == "stimulus":
        return base + field_[len(head) :]
    return f"{base}.{field_}"


def _resolve_stimulus_files(
    kind: Any, params: dict[str, Any], base_dir: Path | None, depth: int = 0
) -> dict[str, Any]:
    """Resolve image paths, also inside compositions, against ``base_dir``."""
    out = dict(params)
    if depth > 16:
        return out
    if kind == "image" and "path" in out:
        out["path"] = _resolve_path(out["path"], base_dir)
    child = out.get("stimulus")
    if isinstance(child, dict):
        out["stimulus"] = _resolve_child(child, base_dir, depth)
    parts = out.get("stimuli")
    if isinstance(parts, list):
        out["stimuli"] = [
            _resolve_child(p, base_dir, depth) if isinstance(p, dict) else p for p in parts
        ]
    return out


def _resolve_child(item: dict[str, Any], base_dir: Path | None, depth: int) -> dict[str, Any]:
    rest = {k: val for k, val in item.items() if k != "kind"}
    resolved = _resolve_stimulus_files(item.get("kind"), rest, base_dir, depth + 1)
    return {"kind": item["kind"], **resolved} if "kind" in item else resolved


_MISSING_ARG = re.compile(r"missing \d+ required (?:keyword-only |positional )?arguments?: (.*)")


def _stimuli(
    report: _Report,
    raw: Mapping[str, Any],
    eye: Eye | None,
    pitch_um: float | None,
    base_dir: Path | None,
) -> dict[str, Stimulus]:
    out: dict[str, Stimulus] = {}
    tbl = report.table(raw, "stimuli", "stimuli")
    if not tbl:
        if tbl is not None and "stimuli" not in raw:
            report.add("stimuli", None, "a [stimuli.<name>] table for each stimulus", "missing")
        return out
    kinds = ", ".join(STIMULUS_KINDS)
    for name, body in tbl.items():
        path = f"stimuli.{name}"
        if not _NAME_RE.fullmatch(name):
            report.add(path, name, "a name of letters, digits, '_' and '-'", "':' names partners")
            continue
        if not isinstance(body, dict):
            report.add(path, body, "a table with kind = <one of the stimulus kinds>")
            continue
        kind = body.get("kind")
        if not isinstance(kind, str) or kind not in STIMULUS_KINDS:
            report.add(f"{path}.kind", kind, "one of " + kinds, "missing" if kind is None else "")
            continue
        params = _resolve_stimulus_files(
            kind, {k: val for k, val in body.items() if k != "kind"}, base_dir
        )
        try:
            out[name] = stimulus_from_dict(kind, params, eye=eye, pitch_um=pitch_um)
        except StimplanError as exc:
            report.add_exc(exc, _stimulus_path(exc.field, name))
        except TypeError as exc:
            m = _MISSING_ARG.search(str(exc))
            if m:
                missing = _key_parts(m.group(1).split(" and ")[0])[0]
                report.add(
                    f"{path}.{missing}", None, f"a value (required by kind {kind!r})", "missing"
                )
            else:
                report.add_unexpected(path, exc)
        except Exception as exc:
            report.add_unexpected(path, exc)
    return out


def _partner(name: str, stimuli: Mapping[str, Stimulus]) -> tuple[Stimulus | None, str, str]:
    """The stimulus a step name refers to: ``base`` or ``base:reversed`` / ``base:inverted``.

    Returns ``(stimulus, allowed, detail)``; the stimulus is ``None`` on error.
    """
    parts = name.split(":")
    base = parts[0]
    known = ", ".join(repr(k) for k in stimuli if ":" not in k) or "none defined"
    allowed = f"a stimulus under [stimuli] ({known}), optionally with ':reversed' or ':inverted'"
    if base not in stimuli:
        return None, allowed, "not defined"
    stim = stimuli[base]
    for suffix in parts[1:]:
        if suffix == "reversed":
            flip = getattr(stim, "reversed", None)
            if not callable(flip):
                return (
                    None,
                    allowed,
                    f"{stim.kind!r} has no reversed partner; ':inverted' works for any",
                )
            stim = flip()
        elif suffix == "inverted":
            stim = stim.inverted()
        else:
            known_suffixes = ", ".join(f"':{x}'" for x in PARTNER_SUFFIXES)
            return None, allowed, f"unknown suffix ':{suffix}' (known: {known_suffixes})"
    return stim, allowed, ""


# -- steps ------------------------------------------------------------------------


def _check_step_values(prefix: str, d: Mapping[str, Any], errors: list[ConfigError]) -> dict:
    """Validate the numbers of one step, appending errors; returns the converted values."""
    out: dict[str, Any] = {}

    def take(name: str, fn: Callable[[str, Any], Any]) -> None:
        if d.get(name) is None:
            return
        try:
            out[name] = fn(f"{prefix}.{name}", d[name])
        except ConfigError as exc:
            errors.append(exc)
        except Exception as exc:
            errors.append(ConfigError(f"{prefix}.{name}", d[name], "a number", str(exc)))

    def positive(f: str, x: Any) -> float:
        return v.number(f, x, lo=0, lo_open=True)

    for name in (
        "duration_ms",
        "pulse_ms",
        "rate_hz",
        "power_mw",
        "irradiance_mw_per_mm2",
        "alternate_ms",
    ):
        take(name, positive)
    take("blank_after_ms", lambda f, x: v.number(f, x, lo=0))
    take("repeat", lambda f, x: v.integer(f, x, lo=1, hi=MAX_FRAMES))
    take("irradiance_basis", lambda f, x: v.choice(f, x, IRRADIANCE_BASES))
    pulse, rate = out.get("pulse_ms"), out.get("rate_hz")
    dur, alt = out.get("duration_ms"), out.get("alternate_ms")
    if pulse is not None and rate is not None:
        period = 1000.0 / rate
        if pulse > period * (1 + 1e-12):
            errors.append(
                ConfigError(
                    f"{prefix}.pulse_ms",
                    pulse,
                    f"<= 1000 / rate_hz = {period:g} ms",
                    "a pulse cannot be longer than its period",
                )
            )
    if pulse is not None and dur is not None and pulse > dur:
        errors.append(ConfigError(f"{prefix}.pulse_ms", pulse, f"<= duration_ms ({dur:g} ms)"))
    if alt is not None and dur is not None and alt >= dur:
        errors.append(
            ConfigError(
                f"{prefix}.alternate_ms",
                alt,
                f"< duration_ms ({dur:g} ms)",
                "the pair must alternate at least once",
            )
        )
    if alt is not None and pulse is not None and pulse > alt:
        errors.append(ConfigError(f"{prefix}.pulse_ms", pulse, f"<= alternate_ms ({alt:g} ms)"))
    return out


def _steps(
    report: _Report,
    raw: Mapping[str, Any],
    stimuli: dict[str, Stimulus],
    failed: set[str],
    has_implant: bool,
    default_power_mw: float,
) -> list[StepSpec]:
    items = raw.get("steps")
    if items is None:
        report.add("steps", None, "one [[steps]] table or more", "missing")
        return []
    if not isinstance(items, list) or not items:
        report.add("steps", items, "one [[steps]] table or more (an array of tables)")
        return []
    out: list[StepSpec] = []
    for i, item in enumerate(items):
        prefix = f"steps[{i}]"
        n_before = len(report.errors)
        if not isinstance(item, dict):
            report.add(prefix, item, "a [[steps]] table")
            continue
        report.unknown_keys(item, prefix, _STEP_KEYS)
        names = _step_stimuli(report, item, prefix, stimuli, failed)
        for key in _STEP_REQUIRED:
            if key not in item:
                report.add(f"{prefix}.{key}", None, "a number > 0", "missing")
        if "alternate" in item and "alternate_ms" not in item:
            report.add(f"{prefix}.alternate_ms", None, "> 0 (ms) with alternate", "missing")
        if "alternate_ms" in item and "alternate" not in item:
            report.add(f"{prefix}.alternate_ms", item["alternate_ms"], "only with alternate")
        has_power = item.get("power_mw") is not None
        has_irr = item.get("irradiance_mw_per_mm2") is not None
        if has_power and has_irr:
            report.add(
                f"{prefix}.irradiance_mw_per_mm2",
                item["irradiance_mw_per_mm2"],
                "either power_mw or irradiance_mw_per_mm2, not both",
            )
        if has_irr and not has_implant:
            report.add(
                f"{prefix}.irradiance_mw_per_mm2",
                item["irradiance_mw_per_mm2"],
                "only with an [implant] (the target is read on its ON pixels)",
                "or give power_mw",
            )
        if "irradiance_basis" in item and not has_irr:
            report.add(
                f"{prefix}.irradiance_basis",
                item["irradiance_basis"],
                "only with irradiance_mw_per_mm2",
            )
        errs: list[ConfigError] = []
        vals = _check_step_values(prefix, item, errs)
        for e in errs:
            report.add_exc(e, e.field)
        if len(report.errors) > n_before or names is None:
            continue
        if not has_power and not has_irr:
            vals["power_mw"] = default_power_mw
        try:
            out.append(StepSpec(stimuli=names, **vals))
        except StimplanError as exc:
            report.add_exc(exc, _rebase(exc.field, "step", prefix))
        except Exception as exc:
            report.add_unexpected(prefix, exc)
    return out


def _step_stimuli(
    report: _Report,
    item: Mapping[str, Any],
    prefix: str,
    stimuli: dict[str, Stimulus],
    failed: set[str],
) -> tuple[str, ...] | None:
    """The stimulus names of a step, each checked (partners resolved into ``stimuli``)."""
    if ("stimulus" in item) == ("alternate" in item):
        report.add(
            f"{prefix}.stimulus",
            item.get("stimulus"),
            'exactly one of stimulus = "<name>" and alternate = ["<a>", "<b>"]',
            "both given" if "stimulus" in item else "missing",
        )
        return None
    if "stimulus" in item:
        refs = [(f"{prefix}.stimulus", item["stimulus"])]
    else:
        alt = item["alternate"]
        if not isinstance(alt, list) or len(alt) != 2:
            report.add(f"{prefix}.alternate", alt, 'a pair of stimulus names ["<a>", "<b>"]')
            return None
        refs = [(f"{prefix}.alternate[{j}]", name) for j, name in enumerate(alt)]
    ok = True
    for where, name in refs:
        if not isinstance(name, str) or not name:
            report.add(where, name, "a stimulus name (a string)")
            ok = False
            continue
        if name in stimuli:
            continue
        base = name.split(":")[0]
        if base in failed:
            ok = False  # its definition had an error, already reported
            continue
        stim, allowed, detail = _partner(name, stimuli)
        if stim is None:
            report.add(where, name, allowed, detail)
            ok = False
        else:
            stimuli[name] = stim
    return tuple(name for _, name in refs) if ok else None


# -- the specification --------------------------------------------------------------


@dataclass(frozen=True)
class StepSpec:
    """One step of a sequence.

    Parameters
    ----------
    stimuli : tuple of str
        The stimulus shown, or the pair that alternates (pattern reversal).
        Names refer to :attr:`SequenceSpec.stimuli`.
    duration_ms : float
        Length of one repetition of the step, ms, > 0.
    pulse_ms : float
        Width of each light pulse, ms, > 0, at most the period
        ``1000 / rate_hz`` and at most ``duration_ms`` (and ``alternate_ms``).
    rate_hz : float
        Pulse repetition rate, Hz, > 0.
    power_mw : float, optional
        Laser power on the SLM, mW, > 0.
    irradiance_mw_per_mm2 : float, optional
        Instead of ``power_mw``: the target retinal irradiance on the lit
        implant pixels, mW/mm², > 0. Exactly one of the two is set.
    irradiance_basis : {"mean", "min"}
        Whether the target is the mean or the minimum irradiance over the
        ON pixels.
    repeat : int
        Number of repetitions, in [1, 100000].
    blank_after_ms : float
        Dark pause after each repetition, ms, >= 0.
    alternate_ms : float, optional
        With two stimuli: how long each is shown before the other, ms, in
        ``(0, duration_ms)``.
    """

    stimuli: tuple[str, ...]
    duration_ms: float
    pulse_ms: float
    rate_hz: float
    power_mw: float | None = None
    irradiance_mw_per_mm2: float | None = None
    irradiance_basis: str = "mean"
    repeat: int = 1
    blank_after_ms: float = 0.0
    alternate_ms: float | None = None

    def __post_init__(self) -> None:
        names = self.stimuli
        if isinstance(names, str):
            names = (names,)
        if (
            not isinstance(names, (list, tuple))
            or len(names) not in (1, 2)
            or not all(isinstance(n, str) and n for n in names)
        ):
            raise ConfigError("step.stimuli", names, "one stimulus name or a pair")
        object.__setattr__(self, "stimuli", tuple(names))
        if (len(names) == 2) != (self.alternate_ms is not None):
            raise ConfigError(
                "step.alternate_ms", self.alternate_ms, "> 0 with a pair of stimuli, else unset"
            )
        if (self.power_mw is None) == (self.irradiance_mw_per_mm2 is None):
            raise ConfigError(
                "step.power_mw", self.power_mw, "exactly one of power_mw and irradiance_mw_per_mm2"
            )
        for name in _STEP_REQUIRED:
            if getattr(self, name) is None:
                raise ConfigError(f"step.{name}", None, "a number > 0", "missing")
        errors: list[ConfigError] = []
        given = {f.name: getattr(self, f.name) for f in _STEP_FIELDS}
        vals = _check_step_values("step", given, errors)
        if errors:
            raise errors[0]
        for name, val in vals.items():
            object.__setattr__(self, name, val)

    @property
    def period_ms(self) -> float:
        """Pulse period, ``1000 / rate_hz``, ms."""
        return 1000.0 / self.rate_hz

    @property
    def duty_cycle(self) -> float:
        """``pulse_ms / period_ms``."""
        return self.pulse_ms / self.period_ms

    @property
    def alternating(self) -> bool:
        return len(self.stimuli) == 2

    def to_dict(self) -> dict[str, Any]:
        """The step as in the file (``stimulus`` or ``alternate``, unset keys left out)."""
        out: dict[str, Any] = {}
        if self.alternating:
            out["alternate"] = list(self.stimuli)
            out["alternate_ms"] = self.alternate_ms
        else:
            out["stimulus"] = self.stimuli[0]
        out.update(duration_ms=self.duration_ms, pulse_ms=self.pulse_ms, rate_hz=self.rate_hz)
        if self.power_mw is not None:
            out["power_mw"] = self.power_mw
        else:
            out["irradiance_mw_per_mm2"] = self.irradiance_mw_per_mm2
            out["irradiance_basis"] = self.irradiance_basis
        out.update(repeat=self.repeat, blank_after_ms=self.blank_after_ms)
        return out


_STEP_FIELDS = dataclasses.fields(StepSpec)


def _asdict_set(obj: Any) -> dict[str, Any]:
    """Dataclass fields as a dict, ``None`` values left out (TOML has no null)."""
    return {
        f.name: getattr(obj, f.name)
        for f in dataclasses.fields(obj)
        if getattr(obj, f.name) is not None
    }


@dataclass(frozen=True)
class SequenceSpec:
    """A validated sequence: everything a plan needs, in physical units.

    Parameters
    ----------
    title : str
    seed : int
        Seeds the holograms' random start phases and the shuffled step order.
    system : OpticalSystem
        SLM, laser (its ``power_mw`` is the default power of the steps),
        relay and eye.
    implant : Implant or None
    stimuli : dict of str to Stimulus
        The named stimuli, and the partners the steps use under their full
        names (``"checks:reversed"``).
    steps : tuple of StepSpec
    ifta : IftaSettings
        Hologram settings (``seed`` from the sequence; ``group_weighting``
        on when the design is implant-aware).
    implant_aware : bool
        Design holograms that light the ON implant pixels' photodiodes.
    oversample : int
        Prediction oversampling, in [2, 8].
    offset_um : tuple of float
        Shift of the pattern on the retina ``(x, y)``, µm.
    on_threshold : float
        Cell-mean stimulus at which an implant pixel is ON, in (0, 1].
    mask : AmplitudeMask
        The amplitude-mask projector of the comparison.
    protocol : ProtocolCap or None
        Caps of the user's own protocol.
    shuffle : bool
        Shuffle the step order (from ``seed``).
    repeats : int
        Whole-sequence repeats.
    source_path : str or None
        The file, when read from one.
    raw : dict
        The parsed TOML, for the manifest.
    """

    title: str
    seed: int
    system: OpticalSystem
    implant: Implant | None
    stimuli: dict[str, Stimulus]
    steps: tuple[StepSpec, ...]
    ifta: IftaSettings = field(default_factory=IftaSettings)
    implant_aware: bool = False
    oversample: int = 2
    offset_um: tuple[float, float] = (0.0, 0.0)
    on_threshold: float = 0.5
    mask: AmplitudeMask = field(default_factory=lambda: MASK_PRESETS["lcd"])
    protocol: ProtocolCap | None = None
    shuffle: bool = False
    repeats: int = 1
    source_path: str | None = field(default=None, compare=False)
    raw: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)

    def __post_init__(self) -> None:
        f = object.__setattr__
        if not isinstance(self.title, str):
            raise ConfigError("title", self.title, "a string")
        f(self, "seed", v.integer("seed", self.seed, lo=0, hi=_SEED_MAX))
        for name, cls in (
            ("system", OpticalSystem),
            ("ifta", IftaSettings),
            ("mask", AmplitudeMask),
        ):
            if not isinstance(getattr(self, name), cls):
                raise ConfigError(name, getattr(self, name), f"a {cls.__name__}")
        if self.implant is not None and not isinstance(self.implant, Implant):
            raise ConfigError("implant", self.implant, "an Implant or None")
        if self.protocol is not None and not isinstance(self.protocol, ProtocolCap):
            raise ConfigError("limits", self.protocol, "a ProtocolCap or None")
        f(self, "steps", tuple(self.steps))
        if not self.steps:
            raise ConfigError("steps", self.steps, "one step or more")
        for i, step in enumerate(self.steps):
            if not isinstance(step, StepSpec):
                raise ConfigError(f"steps[{i}]", step, "a StepSpec")
            for name in step.stimuli:
                if name not in self.stimuli:
                    raise ConfigError(f"steps[{i}].stimulus", name, "a name in stimuli")
        for name, stim in self.stimuli.items():
            if not isinstance(stim, Stimulus):
                raise ConfigError(f"stimuli.{name}", stim, "a Stimulus")
        f(self, "implant_aware", v.boolean("hologram.implant_aware", self.implant_aware))
        if self.implant_aware and self.implant is None:
            raise ConfigError("hologram.implant_aware", True, "false without an implant")
        f(self, "oversample", v.integer("hologram.oversample", self.oversample, lo=2, hi=8))
        f(self, "offset_um", _pair_um("hologram.offset_um", self.offset_um))
        f(
            self,
            "on_threshold",
            v.number("hologram.on_threshold", self.on_threshold, lo=0, hi=1, lo_open=True),
        )
        f(self, "shuffle", v.boolean("order.shuffle", self.shuffle))
        f(self, "repeats", v.integer("order.repeats", self.repeats, lo=1, hi=MAX_FRAMES))

    def to_dict(self) -> dict[str, Any]:
        """The fully resolved configuration, JSON-able, in the layout of the file.

        Defaults are filled in, presets replaced by their values, sizes
        converted to µm and relative paths made absolute, so
        ``sequence_from_dict(spec.to_dict())`` rebuilds an equal
        specification. Partners (``"checks:reversed"``) are left out of
        ``stimuli``: the steps name them. Unset (``None``) values are left
        out.
        """
        s = self.system
        ifta = self.ifta
        hologram = {k: getattr(ifta, k) for k in _IFTA_KEYS}
        hologram.update(
            implant_aware=self.implant_aware,
            oversample=self.oversample,
            offset_um=list(self.offset_um),
            on_threshold=self.on_threshold,
        )
        out: dict[str, Any] = {
            "format": FORMAT,
            "title": self.title,
            "seed": self.seed,
            "optics": {
                "slm": _asdict_set(s.slm),
                "laser": _asdict_set(s.illumination),
                "relay": _asdict_set(s.relay),
            },
            "eye": _asdict_set(s.eye),
        }
        if self.implant is not None:
            out["implant"] = self.implant.to_dict()
        out["hologram"] = hologram
        out["mask"] = _asdict_set(self.mask)
        if self.protocol is not None:
            out["limits"] = _asdict_set(self.protocol)
        out["order"] = {"shuffle": self.shuffle, "repeats": self.repeats}
        out["stimuli"] = {k: st.to_dict() for k, st in self.stimuli.items() if ":" not in k}
        out["steps"] = [step.to_dict() for step in self.steps]
        return out


# -- entry points -----------------------------------------------------------------------


def load_sequence(path: str | os.PathLike[str]) -> SequenceSpec:
    """Read and validate a sequence file.

    Parameters
    ----------
    path : str or path-like
        The TOML file, at most :data:`MAX_FILE_BYTES`, UTF-8. Relative file
        paths inside it are resolved against its folder.

    Returns
    -------
    SequenceSpec

    Raises
    ------
    SequenceError
        If the file cannot be read or holds any error (all are listed).
    """
    try:
        p = Path(path)
        shown = os.path.abspath(p)
    except (TypeError, ValueError) as exc:
        raise SequenceError([ConfigError("file", path, "a file path", str(exc))]) from None
    try:
        if not p.is_file():
            raise FileNotFoundError("no such file")
        size = p.stat().st_size
        if size > MAX_FILE_BYTES:
            raise SequenceError(
                [ConfigError("file", f"{size} bytes", f"at most {MAX_FILE_BYTES} bytes")], shown
            )
        data = p.read_bytes()
    except OSError as exc:
        raise SequenceError(
            [ConfigError("file", str(p), "an existing, readable sequence file", str(exc))], shown
        ) from None
    return parse_sequence(data, base_dir=p.parent, source=shown)


def parse_sequence(
    text: str | bytes,
    *,
    base_dir: str | os.PathLike[str] | None = None,
    source: str | None = None,
) -> SequenceSpec:
    """Validate the text of a sequence file.

    Parameters
    ----------
    text : str or bytes
        TOML text (bytes are read as UTF-8), at most :data:`MAX_FILE_BYTES`.
    base_dir : str or path-like, optional
        Folder against which relative file paths are resolved (default: the
        current folder).
    source : str, optional
        Name of the file, for messages and :attr:`SequenceSpec.source_path`.

    Returns
    -------
    SequenceSpec

    Raises
    ------
    SequenceError
        Listing every error found, with key paths and line numbers.
    """
    if isinstance(text, (bytes, bytearray)):
        if len(text) > MAX_FILE_BYTES:
            raise SequenceError(
                [ConfigError("file", f"{len(text)} bytes", f"at most {MAX_FILE_BYTES} bytes")],
                source,
            )
        try:
            text = bytes(text).decode("utf-8")
        except UnicodeDecodeError as exc:
            raise SequenceError(
                [ConfigError("file", None, "UTF-8 text", str(exc))], source
            ) from None
    if not isinstance(text, str):
        raise SequenceError([ConfigError("file", type(text).__name__, "TOML text")], source)
    size = len(text.encode("utf-8", "surrogatepass"))
    if size > MAX_FILE_BYTES:
        raise SequenceError(
            [ConfigError("file", f"{size} bytes", f"at most {MAX_FILE_BYTES} bytes")], source
        )
    text = text.removeprefix("\ufeff")
    index = _LineIndex(text)
    dotted = _dotted_line(text)
    if dotted is not None:
        no, n = dotted
        raise SequenceError(
            [
                ConfigError(
                    index.table_at(no) or "sequence",
                    f"{n} '.' on one line",
                    f"at most {MAX_DOTS_PER_LINE} outside strings",
                    "keys nested that deep (or that many decimal numbers on one line) are refused",
                    line=no,
                )
            ],
            source,
        )
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SequenceError([_syntax_error(exc, text, index)], source) from None
    except Exception as exc:  # e.g. nesting too deep for the reader
        raise SequenceError(
            [ConfigError("sequence", None, "TOML text", f"{type(exc).__name__}: {exc}")], source
        ) from None
    return _from_raw(raw, index, base_dir, source)


def sequence_from_dict(
    data: Mapping[str, Any],
    *,
    base_dir: str | os.PathLike[str] | None = None,
    source: str | None = None,
) -> SequenceSpec:
    """Validate a sequence given as nested dictionaries (the layout of the file).

    The inverse of :meth:`SequenceSpec.to_dict`. No line numbers are known.

    Raises
    ------
    SequenceError
    """
    if not isinstance(data, Mapping):
        raise SequenceError([ConfigError("sequence", type(data).__name__, "a table")], source)
    return _from_raw(dict(data), None, base_dir, source)


def _syntax_error(exc: tomllib.TOMLDecodeError, text: str, index: _LineIndex) -> ConfigError:
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


def _from_raw(
    raw: dict[str, Any],
    index: _LineIndex | None,
    base_dir: str | os.PathLike[str] | None,
    source: str | None,
) -> SequenceSpec:
    report = _Report(index)
    try:
        base = Path(base_dir) if base_dir is not None else None
        spec = _assemble(report, raw, base, source)
    except SequenceError:
        raise
    except Exception as exc:  # a last guard: nothing but a SequenceError leaves
        report.add_unexpected("sequence", exc)
        spec = None
    if report.errors or spec is None:
        raise SequenceError(report.errors, source)
    return spec


def _assemble(
    report: _Report, raw: dict[str, Any], base_dir: Path | None, source: str | None
) -> SequenceSpec | None:
    report.unknown_keys(raw, "", _TOP_KEYS)
    fmt = raw.get("format")
    if fmt != FORMAT:
        report.add("format", fmt, repr(FORMAT), "missing" if fmt is None else "unknown format")
    title = raw.get("title", "")
    if not isinstance(title, str):
        report.add("title", title, "a string")
    seed = 0
    if "seed" in raw:
        try:
            seed = v.integer("seed", raw["seed"], lo=0, hi=_SEED_MAX)
        except ConfigError as exc:
            report.add_exc(exc, "seed")
    slm, laser, relay = _optics(report, raw, base_dir)
    if laser is not None:
        # a sequence is planned with its exposure assessed: refuse, at the file's own
        # key and line, a wavelength whose limits are not implemented
        try:
            check_wavelength(laser.wavelength_nm, "optics.laser.wavelength_nm")
        except ConfigError as exc:
            report.add_exc(exc, "optics.laser.wavelength_nm")
    eye = _eye(report, raw)
    system = None
    if None not in (slm, laser, relay, eye):
        remaps = {"slm": "optics.slm", "illumination": "optics.laser", "relay": "optics.relay"}

        def where(f: str) -> str:
            head = re.split(r"[.\[]", f, maxsplit=1)[0]
            return _rebase(f, head, remaps[head]) if head in remaps else f

        system = _build(
            report,
            OpticalSystem,
            dict(slm=slm, illumination=laser, relay=relay, eye=eye),
            "optics",
            where,
            retry=False,
        )
    implant, has_implant = _implant(report, raw)
    holo = _hologram(report, raw, seed, has_implant)
    mask = _section(report, raw, "mask", _MASK_KEYS, _make_mask, "mask", keep=("kind",))
    protocol = None
    if "limits" in raw:
        protocol = _section(report, raw, "limits", _LIMITS_KEYS, _make_limits, "protocol")
    shuffle, repeats = _order(report, raw)
    # With a broken [eye] or [implant] (already reported), stand-ins let the
    # stimuli's own values be checked; the specification is not built anyway.
    if implant is not None:
        pitch = implant.pitch_um
    else:
        pitch = 1.0 if has_implant else None
    stimuli = _stimuli(report, raw, eye if eye is not None else Eye(), pitch, base_dir)
    defined = raw.get("stimuli")
    failed = {k for k in defined if k not in stimuli} if isinstance(defined, dict) else set()
    default_power = laser.power_mw if laser is not None else Illumination().power_mw
    steps = _steps(report, raw, stimuli, failed, has_implant, default_power)
    if steps and not report.errors:
        _check_counts(report, steps, repeats)
    if report.errors:
        return None
    return SequenceSpec(
        title=title,
        seed=seed,
        system=system,
        implant=implant,
        stimuli=stimuli,
        steps=tuple(steps),
        ifta=holo["ifta"],
        implant_aware=bool(holo["implant_aware"]) and implant is not None,
        oversample=holo["oversample"],
        offset_um=holo["offset_um"],
        on_threshold=holo["on_threshold"],
        mask=mask if mask is not None else MASK_PRESETS["lcd"],
        protocol=protocol,
        shuffle=shuffle,
        repeats=repeats,
        source_path=source,
        raw=raw,
    )


# -- the timeline ---------------------------------------------------------------------------


@dataclass(frozen=True)
class FrameSpec:
    """One frame of the timeline: a stimulus (or darkness) and its pulse train.

    Parameters
    ----------
    index : int
        Position in the timeline, from 0.
    start_ms, duration_ms : float
        Start from the beginning of the sequence and length, ms.
    pulse_ms : float
        Pulse width, ms (0 for a dark frame).
    rate_hz : float
        Pulse rate, Hz (0 for a dark frame).
    power_mw : float or None
        Laser power on the SLM, mW, when the step gives a power.
    irradiance_mw_per_mm2 : float or None
        Target retinal irradiance on the lit implant pixels, when the step
        gives one.
    irradiance_basis : {"mean", "min"}
    stimulus : str or None
        Name in :attr:`SequenceSpec.stimuli`; ``None`` for a dark pause.
    step_index : int
        The step (index into :attr:`SequenceSpec.steps`, file order).
    repetition : int
        Which repetition of the step, from 0.
    sequence_repeat : int
        Which whole-sequence repeat, from 0.
    """

    index: int
    start_ms: float
    duration_ms: float
    pulse_ms: float
    rate_hz: float
    power_mw: float | None
    irradiance_mw_per_mm2: float | None
    irradiance_basis: str
    stimulus: str | None
    step_index: int
    repetition: int
    sequence_repeat: int = 0

    @property
    def end_ms(self) -> float:
        return self.start_ms + self.duration_ms

    @property
    def is_blank(self) -> bool:
        """True for a dark pause (no stimulus, no pulses)."""
        return self.stimulus is None

    @property
    def period_ms(self) -> float | None:
        """Pulse period, ms (``None`` for a dark frame)."""
        return 1000.0 / self.rate_hz if self.rate_hz > 0 else None

    @property
    def n_pulses(self) -> int:
        """Number of pulses in the frame, ``ceil(duration_ms * rate_hz / 1000)``."""
        if self.is_blank or self.rate_hz <= 0 or self.pulse_ms <= 0:
            return 0
        n = _pieces(self.duration_ms, 1000.0 / self.rate_hz)
        return int(n) if math.isfinite(n) else MAX_PULSES + 1

    def pulses(self) -> list[Pulse]:
        """The pulse train of the frame, absolute start times in ms.

        The train starts at the frame start, one pulse of ``pulse_ms`` every
        ``1000 / rate_hz`` ms; a pulse that would run past the end of the
        frame is cut there. A dark frame has none.

        Returns
        -------
        list of stimplan.exposure.Pulse
        """
        n = self.n_pulses
        if n == 0:
            return []
        if n > MAX_PULSES:
            raise ConfigError("frame.rate_hz", self.rate_hz, f"at most {MAX_PULSES} pulses")
        period = 1000.0 / self.rate_hz
        out = []
        for k in range(n):
            offset = k * period
            width = min(self.pulse_ms, self.duration_ms - offset)
            out.append(Pulse(self.start_ms + offset, width))
        return out


def _pieces(total_ms: float, piece_ms: float) -> float:
    """How many pieces of ``piece_ms`` cover ``total_ms``, the last one cut: ``ceil``.

    A left-over shorter than ``_PIECE_TOL`` of a piece is rounding, not a
    piece. Returns ``inf`` for absurdly many.
    """
    r = total_ms / piece_ms
    if not math.isfinite(r) or r > 1e15:
        return math.inf
    return float(max(1, math.ceil(r - _PIECE_TOL)))


def _step_frames(step: StepSpec) -> list[tuple[str, float, float]]:
    """``(stimulus, offset_ms, duration_ms)`` of the frames of one repetition (no blank)."""
    if not step.alternating:
        return [(step.stimuli[0], 0.0, step.duration_ms)]
    n = int(_pieces(step.duration_ms, step.alternate_ms))
    out = []
    for k in range(n):
        offset = k * step.alternate_ms
        dur = step.alternate_ms if k < n - 1 else step.duration_ms - offset
        out.append((step.stimuli[k % 2], offset, dur))
    return out


def _step_counts(step: StepSpec) -> tuple[float, float]:
    """Frames and pulses of one repetition of a step (blank included), without expanding."""
    period = step.period_ms
    blank = 1.0 if step.blank_after_ms > 0 else 0.0
    if not step.alternating:
        return 1.0 + blank, _pieces(step.duration_ms, period)
    n = _pieces(step.duration_ms, step.alternate_ms)
    if not math.isfinite(n):
        return math.inf, math.inf
    last = step.duration_ms - (n - 1) * step.alternate_ms
    pulses = (n - 1) * _pieces(step.alternate_ms, period) + _pieces(last, period)
    return n + blank, pulses


def timeline_counts(spec: SequenceSpec) -> tuple[float, float]:
    """Number of frames and of pulses of the expanded timeline, computed without expanding.

    Returns
    -------
    (float, float)
        Whole numbers, or ``inf`` for absurdly many.
    """
    return _counts(spec.steps, spec.repeats)


def _counts(steps: Sequence[StepSpec], repeats: int) -> tuple[float, float]:
    frames = pulses = 0.0
    for step in steps:
        f, p = _step_counts(step)
        frames += step.repeat * f
        pulses += step.repeat * p
    return frames * repeats, pulses * repeats


def _count_errors(steps: Sequence[StepSpec], repeats: int) -> list[ConfigError]:
    frames, pulses = _counts(steps, repeats)
    out = []
    if frames > MAX_FRAMES:
        out.append(
            ConfigError(
                "steps",
                f"{frames:.4g} frames",
                f"at most {MAX_FRAMES} frames in the expanded timeline",
                "fewer repeats, longer alternate_ms or a shorter sequence",
            )
        )
    if pulses > MAX_PULSES:
        out.append(
            ConfigError(
                "steps",
                f"{pulses:.4g} pulses",
                f"at most {MAX_PULSES} pulses in the expanded timeline",
                "fewer repeats, a lower rate_hz or a shorter sequence",
            )
        )
    return out


def _check_counts(report: _Report, steps: Sequence[StepSpec], repeats: int) -> None:
    for e in _count_errors(steps, repeats):
        report.add_exc(e, e.field)


def step_order(spec: SequenceSpec) -> tuple[tuple[int, ...], ...]:
    """The order of the steps in each whole-sequence repeat.

    File order, or, with ``shuffle``, a permutation for each repeat drawn in
    turn from ``numpy.random.default_rng(seed)``.

    Returns
    -------
    tuple of tuple of int
        One tuple of step indices per repeat.
    """
    n = len(spec.steps)
    if not spec.shuffle:
        return tuple(tuple(range(n)) for _ in range(spec.repeats))
    rng = np.random.default_rng(spec.seed)
    return tuple(tuple(int(i) for i in rng.permutation(n)) for _ in range(spec.repeats))


def expand_timeline(spec: SequenceSpec) -> tuple[FrameSpec, ...]:
    """The frames of a sequence in time order.

    Parameters
    ----------
    spec : SequenceSpec

    Returns
    -------
    tuple of FrameSpec
        Contiguous frames from 0 ms: for each whole-sequence repeat, the
        steps in :func:`step_order`; for each step, its repetitions, each
        made of one frame (or the alternating frames) and, if
        ``blank_after_ms > 0``, a dark frame.

    Raises
    ------
    SequenceError
        If the timeline would have more than :data:`MAX_FRAMES` frames or
        :data:`MAX_PULSES` pulses.
    """
    errs = _count_errors(spec.steps, spec.repeats)
    if errs:
        raise SequenceError(errs, spec.source_path)
    frames: list[FrameSpec] = []
    t = 0.0
    for cycle, order in enumerate(step_order(spec)):
        for si in order:
            step = spec.steps[si]
            parts = _step_frames(step)
            for rep in range(step.repeat):
                t0 = t
                for name, offset, dur in parts:
                    frames.append(_frame(len(frames), t0 + offset, dur, step, name, si, rep, cycle))
                t = t0 + step.duration_ms
                if step.blank_after_ms > 0:
                    frames.append(
                        _frame(len(frames), t, step.blank_after_ms, step, None, si, rep, cycle)
                    )
                    t += step.blank_after_ms
    return tuple(frames)


def _frame(
    index: int,
    start: float,
    dur: float,
    step: StepSpec,
    name: str | None,
    si: int,
    rep: int,
    cycle: int,
) -> FrameSpec:
    lit = name is not None
    return FrameSpec(
        index=index,
        start_ms=start,
        duration_ms=dur,
        pulse_ms=step.pulse_ms if lit else 0.0,
        rate_hz=step.rate_hz if lit else 0.0,
        power_mw=step.power_mw if lit else None,
        irradiance_mw_per_mm2=step.irradiance_mw_per_mm2 if lit else None,
        irradiance_basis=step.irradiance_basis,
        stimulus=name,
        step_index=si,
        repetition=rep,
        sequence_repeat=cycle,
    )


def total_duration_ms(frames: Sequence[FrameSpec]) -> float:
    """Time from the start of the first frame to the end of the last, ms (0 for none)."""
    if not frames:
        return 0.0
    return max(f.end_ms for f in frames) - min(f.start_ms for f in frames)
