"""Broken sequence files for fuzzing, and the property every one of them must keep.

The cases start from valid sequence documents (the scenarios of
:mod:`tests.scenarios` and the worked example of ``docs/sequence-format.md``,
read with :mod:`tomllib`) and break them: values replaced by wrong types,
extreme numbers, odd unicode or deep nesting; keys deleted; unknown keys
added; subtrees moved to the wrong place. A case is handed to stimplan as a
dictionary (:func:`sequence_from_dict`), as TOML text (:func:`parse_sequence`,
written back by :func:`toml_dumps`) or as a file (:func:`load_sequence`);
truncated valid files and random bytes are cases too.

The property (:func:`case_problem`; common practice for fuzzing): reading a
case returns a :class:`SequenceSpec` or raises a :class:`StimplanError` whose
key path is a non-empty string and whose message can be formatted; every
other exception is a crash. An error that only wraps an unexpected exception
(the loader's last guard, ``"cannot be used (TypeError: ...)"``) counts as a
crash too: it names no allowed range.

``tests/test_fuzz.py`` runs a bounded number of cases; ``benchmarks/fuzz.py``
runs 10 000.
"""

from __future__ import annotations

import copy
import datetime as dt
import math
import re
import sys
import tomllib
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from hypothesis import strategies as st

from stimplan.errors import StimplanError
from stimplan.sequence import SequenceSpec, load_sequence, parse_sequence, sequence_from_dict

from .scenarios import gui_sequence, reversal_step, small_sequence

__all__ = [
    "BASE_TEXTS",
    "BASE_DOCS",
    "FuzzCase",
    "toml_dumps",
    "same_document",
    "toml_values",
    "python_values",
    "mutated_documents",
    "dict_cases",
    "text_cases",
    "file_cases",
    "truncated_cases",
    "deep_dict_cases",
    "deep_text_cases",
    "random_byte_cases",
    "fuzz_cases",
    "run_case",
    "case_problem",
]

_DOC = Path(__file__).resolve().parents[1] / "docs" / "sequence-format.md"

_LIMITS = """
[limits]
peak_irradiance_mw_per_mm2 = 5.0
mean_irradiance_mw_per_mm2 = 1.0
name = "demo caps"
source = "demo values"
"""

# Our own document that reaches the sections and stimulus kinds the scenarios leave
# out: a custom eye and implant, a bit depth, a Fresnel lens, mask, limits, order,
# compositions, partners and an alternating step (demo values).
_CUSTOM = (
    """\
format = "stimplan-sequence/1"
title = "fuzz base: custom eye and implant"
seed = 11

[optics.slm]
pixels_x = 128
pixels_y = 96
pitch_um = 8.0
fill_factor = 0.9
bit_depth = 8
grey_2pi = 255
zero_order_fraction = 0.02

[optics.laser]
wavelength_nm = 905.0
power_mw = 3.0
profile = "flat"

[optics.relay]
magnification = 0.3
fresnel_focal_mm = -400.0

[eye]
focal_length_mm = 17.0
pupil_diameter_mm = 6.0
transmission = 0.9
name = "custom eye"

[implant]
pitch_um = 100.0
layout = "square"
outline = "rectangle"
rows = 4
cols = 5
active_fraction = 0.5
trench_um = 2.0
center_x_um = 10.0
rotation_deg = 15.0
name = "block"

[hologram]
method = "wgs"
iterations = 10
initial = "random"
quantized_iterations = 2
window_margin_samples = 3
group_gain = 1.0
oversample = 2
offset_um = [5.0, -5.0]

[mask]
kind = "lcd"
efficiency = 0.1
contrast_ratio = 500.0
field_width_um = 900.0

[limits]
peak_irradiance_mw_per_mm2 = 5.0
name = "fuzz caps"
source = "demo values"

[order]
shuffle = true
repeats = 2

[stimuli.checks]
kind = "checkerboard"
check_deg = 0.5
reversal = true

[stimuli.c]
kind = "landolt"
logmar = 1.0
orientation = "up"

[stimuli.e]
kind = "tumbling_e"
snellen = "20/200"

[stimuli.ring]
kind = "annulus"
inner_diameter_um = 100
outer_diameter_um = 300
contrast = 0.5
polarity = "dark"

[stimuli.both]
kind = "composite"
stimuli = [{ kind = "spot", diameter_um = 50 }, { kind = "bar", width_um = 20, length_um = 200 }]

[stimuli.neg]
kind = "inverted"
stimulus = { kind = "grating", period_um = 200, waveform = "sine", phase_deg = 90 }

[stimuli.only_active]
kind = "masked"
stimulus = { kind = "flash", level = 0.8 }
implant = { pitch_um = 100.0, layout = "square", outline = "square", width_um = 400, \
active_fraction = 0.5 }
region = "active"

[stimuli.dark]
kind = "blank"

"""
    + reversal_step(
        alternate_ms=500,
        duration_ms=2000,
        light='irradiance_mw_per_mm2 = 0.5\nirradiance_basis = "min"',
    )
    + """
[[steps]]
stimulus = "c"
duration_ms = 300
pulse_ms = 5
rate_hz = 10
power_mw = 1.0
repeat = 3
blank_after_ms = 100

[[steps]]
stimulus = "ring:inverted"
duration_ms = 100
pulse_ms = 1
rate_hz = 100

[[steps]]
stimulus = "both"
duration_ms = 100
pulse_ms = 1
rate_hz = 100

[[steps]]
stimulus = "neg"
duration_ms = 100
pulse_ms = 1
rate_hz = 100

[[steps]]
stimulus = "only_active"
duration_ms = 100
pulse_ms = 1
rate_hz = 100

[[steps]]
stimulus = "e"
duration_ms = 100
pulse_ms = 1
rate_hz = 100
"""
)


def _doc_example() -> str:
    """The worked example of ``docs/sequence-format.md`` (its one ``toml`` block)."""
    text = _DOC.read_text(encoding="utf-8")
    return text.split("```toml\n", 1)[1].split("```", 1)[0]


#: Valid sequence texts the cases start from.
BASE_TEXTS: tuple[str, ...] = (
    small_sequence(),
    gui_sequence(1.0, _LIMITS),
    _CUSTOM,
    _doc_example(),
)

#: The same, read with tomllib.
BASE_DOCS: tuple[dict[str, Any], ...] = tuple(tomllib.loads(t) for t in BASE_TEXTS)


# --------------------------------------------------------------------------
# A small TOML writer (enough for the documents tomllib returns)
# --------------------------------------------------------------------------

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")


def _toml_string(text: str) -> str:
    out = ['"']
    for ch in text:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_key(key: str) -> str:
    return key if _BARE_KEY.fullmatch(key) else _toml_string(key)


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, (dt.datetime, dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        if not value:
            return "{}"
        body = ", ".join(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in value.items())
        return "{ " + body + " }"
    raise TypeError(f"no TOML form for {type(value).__name__}")


def _is_table_array(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _write_table(table: dict[str, Any], path: tuple[str, ...], lines: list[str]) -> None:
    for key, value in table.items():
        if not isinstance(value, dict) and not _is_table_array(value):
            lines.append(f"{_toml_key(key)} = {_toml_value(value)}")
    for key, value in table.items():
        name = ".".join(_toml_key(k) for k in (*path, key))
        if isinstance(value, dict):
            lines.append(f"\n[{name}]")
            _write_table(value, (*path, key), lines)
        elif _is_table_array(value):
            for item in value:
                lines.append(f"\n[[{name}]]")
                _write_table(item, (*path, key), lines)


def toml_dumps(doc: dict[str, Any]) -> str:
    """TOML text of ``doc`` (tables as headers, arrays of tables as ``[[...]]``).

    Keys are bare where TOML allows it, else quoted; strings are basic strings
    with control characters escaped; ``nan`` and ``inf`` are written as such.
    """
    lines: list[str] = []
    _write_table(doc, (), lines)
    return "\n".join(lines) + "\n"


def same_document(a: Any, b: Any) -> bool:
    """Deep equality of two documents, with ``nan == nan`` and ``-0.0 != 0.0``."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same_document(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same_document(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, float) and isinstance(b, float):
        return repr(a) == repr(b)
    return type(a) is type(b) and a == b


# --------------------------------------------------------------------------
# Values
# --------------------------------------------------------------------------

_EXTREME = [
    0,
    -1,
    1,
    2,
    3,
    255,
    256,
    8192,
    65536,
    200_000,
    2**31,
    2**63 - 1,
    2**63,
    2**70,
    -(2**70),
    10**300,
    0.0,
    -0.0,
    -1.0,
    -1.5,
    0.5,
    1.0,
    1e-9,
    1e-300,
    5e-324,
    1e300,
    -1e300,
    1.7976931348623157e308,
    math.inf,
    -math.inf,
    math.nan,
]

_ODD_TEXT = [
    "",
    " ",
    "\x00",
    "a\x00b",
    "\n",
    "\t",
    "\x7f",
    "\u202etxet",  # right-to-left override
    "\u200f\u05e9\u05dc\u05d5\u05dd",  # right-to-left mark, Hebrew
    "\u0645\u0631\u062d\u0628\u0627",  # Arabic
    "\U0001f600\U0001f9e0",  # emoji
    "\U0001f469\u200d\U0001f52c",  # emoji with zero-width joiner
    "e\u0301\u0301\u0301",  # combining accents
    "\ufeff",
    "\uffff",
    "\U0010ffff",
    "\u00b5m",
    "rat",
    "RAT",
    "human",
    "rat_55um",
    "human_100um",
    "gaussian",
    "file",
    "flat",
    "hex",
    "square",
    "circle",
    "mraf",
    "lens",
    "lcd",
    "dmd",
    "mean",
    "min",
    "spot",
    "grating",
    "composite",
    "masked",
    "image",
    "bars",
    "bars:reversed",
    "bars:inverted",
    "bars:inverted:reversed",
    "spot:",
    ":",
    "stimplan-sequence/1",
    "stimplan-sequence/2",
    "8.0",
    "nan",
    "1e400",
    "..",
    ".",
    "/",
    "no_such_file.png",
    "x" * 5000,
]


def _all_keys(node: Any, out: set[str]) -> set[str]:
    if isinstance(node, dict):
        for k, v in node.items():
            out.add(k)
            _all_keys(v, out)
    elif isinstance(node, list):
        for v in node:
            _all_keys(v, out)
    return out


_KEY_NAMES = sorted(set().union(*(_all_keys(d, set()) for d in BASE_DOCS)))

_TEXT = st.text(max_size=20) | st.sampled_from(_ODD_TEXT)

_KEYS = st.sampled_from(_KEY_NAMES) | _TEXT | st.sampled_from(["bit_depth", "preset", "kind"])

_NUMBERS = (
    st.sampled_from(_EXTREME)
    | st.integers()
    | st.integers(min_value=-(2**80), max_value=2**80)
    | st.floats()
    | st.floats(min_value=-1e6, max_value=1e6)
)

_TOML_SCALARS = (
    st.booleans()
    | _NUMBERS
    | _TEXT
    | st.datetimes(timezones=st.none() | st.just(dt.UTC))
    | st.dates()
    | st.times()
)


def _nested(depth: int, *, as_dict: bool) -> Any:
    value: Any = 1.0
    for _ in range(depth):
        value = {"kind": "composite", "stimuli": [value]} if as_dict else [value]
    return value


# Not deeper than the writer and copy.deepcopy can take; deeper ones in deep_cases().
_DEEP = st.builds(_nested, st.sampled_from([2, 20, 60, 120]), as_dict=st.booleans())


def toml_values() -> st.SearchStrategy[Any]:
    """Values a TOML document can hold: scalars, arrays and tables, some deeply nested."""
    return (
        st.recursive(
            _TOML_SCALARS,
            lambda inner: st.lists(inner, max_size=4) | st.dictionaries(_KEYS, inner, max_size=4),
            max_leaves=8,
        )
        | _DEEP
    )


_PY_ONLY = st.sampled_from(
    [
        None,
        (1.0, 2.0),
        (),
        b"bytes",
        bytearray(b"\x00"),
        1j,
        {1, 2},
        frozenset(),
        object(),
        Ellipsis,
        np.float64("nan"),
        np.float32(8.0),
        np.int64(8),
        np.uint8(255),
        np.bool_(True),
        np.array([1.0, 2.0]),
        np.zeros((2, 2)),
        np.array("text"),
        "\ud800",  # a lone surrogate (only in a dict, never in UTF-8 text)
        Path("x.png"),
    ]
) | st.just(5000).map(lambda n: 10**n)  # too many digits for str()


def python_values() -> st.SearchStrategy[Any]:
    """Values of a dictionary given to :func:`sequence_from_dict`: TOML values and
    anything else Python has (None, tuples, bytes, complex, NumPy scalars and arrays)."""
    return (
        st.recursive(
            _TOML_SCALARS | _PY_ONLY,
            lambda inner: (
                st.lists(inner, max_size=4)
                | st.dictionaries(_KEYS | st.sampled_from([1, None, 2.5]), inner, max_size=4)
                | st.tuples(inner, inner)
            ),
            max_leaves=8,
        )
        | _DEEP
    )


# --------------------------------------------------------------------------
# Mutations of a valid document
# --------------------------------------------------------------------------


def _paths(node: Any, prefix: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
    out: list[tuple[Any, ...]] = []
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for k, v in items:
        out.append((*prefix, k))
        if isinstance(v, (dict, list)) and len(prefix) < 8:
            out.extend(_paths(v, (*prefix, k)))
    return out


def _tables(node: Any, prefix: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
    out = [prefix] if isinstance(node, dict) else []
    if isinstance(node, (dict, list)) and len(prefix) < 8:
        items = node.items() if isinstance(node, dict) else enumerate(node)
        for k, v in items:
            out.extend(_tables(v, (*prefix, k)))
    return out


def _at(doc: Any, path: tuple[Any, ...]) -> Any:
    for k in path:
        doc = doc[k]
    return doc


@st.composite
def mutated_documents(draw: Any, values: st.SearchStrategy[Any]) -> dict[str, Any]:
    """A base document with one to four mutations (set, delete, add, move)."""
    doc = copy.deepcopy(draw(st.sampled_from(BASE_DOCS)))
    for _ in range(draw(st.integers(1, 4))):
        op = draw(st.sampled_from(["set", "set", "set", "delete", "add", "move"]))
        paths = _paths(doc)
        if op == "add" or not paths:
            where = draw(st.sampled_from(_tables(doc)))
            _at(doc, where)[draw(_KEYS)] = draw(values)
            continue
        path = draw(st.sampled_from(paths))
        parent = _at(doc, path[:-1])
        if op == "delete":
            del parent[path[-1]]
        elif op == "move":
            parent[path[-1]] = copy.deepcopy(_at(doc, draw(st.sampled_from(paths))))
        else:
            parent[path[-1]] = draw(values)
    return doc


# --------------------------------------------------------------------------
# Cases
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class FuzzCase:
    """One input: ``how`` is ``"dict"`` (``data`` a dict), ``"text"`` (a str or
    bytes for :func:`parse_sequence`) or ``"file"`` (bytes written to a file)."""

    how: str
    data: Any

    def __repr__(self) -> str:
        digits = sys.get_int_max_str_digits()
        sys.set_int_max_str_digits(0)  # the cases hold integers of thousands of digits
        try:
            shown = repr(self.data)
        except RecursionError:
            shown = f"<{type(self.data).__name__} nested too deep to show>"
        finally:
            sys.set_int_max_str_digits(digits)
        if len(shown) > 2000:
            shown = shown[:2000] + f"... ({len(shown)} characters)"
        return f"FuzzCase({self.how!r}, {shown})"


def dict_cases() -> st.SearchStrategy[FuzzCase]:
    """Mutated documents given as dictionaries (any Python value)."""
    return mutated_documents(python_values()).map(lambda d: FuzzCase("dict", d))


def text_cases() -> st.SearchStrategy[FuzzCase]:
    """Mutated documents written back to TOML text, as str or UTF-8 bytes."""
    texts = mutated_documents(toml_values()).map(toml_dumps)
    return st.tuples(texts, st.booleans()).map(
        lambda t: FuzzCase("text", t[0].encode("utf-8") if t[1] else t[0])
    )


def file_cases() -> st.SearchStrategy[FuzzCase]:
    """Mutated documents written to a file."""
    texts = mutated_documents(toml_values()).map(toml_dumps)
    return texts.map(lambda t: FuzzCase("file", t.encode("utf-8")))


def _cut(text: str, fraction: float, prefix: str) -> bytes:
    data = (prefix + text).encode("utf-8")
    return data[: int(fraction * len(data))]


def truncated_cases() -> st.SearchStrategy[FuzzCase]:
    """A valid file (sometimes with multi-byte characters first) cut at a random byte."""
    prefix = st.sampled_from(["", "# \u00b5m \U0001f600 \u202e\n", '\ufefftitle = "\u00e9"\n'])
    return st.builds(
        lambda t, f, p, how: FuzzCase(how, _cut(t, f, p)),
        st.sampled_from(BASE_TEXTS),
        st.floats(0.0, 1.0),
        prefix,
        st.sampled_from(["file", "text"]),
    )


def _deep_dict(base: dict[str, Any], depth: int, where: str) -> dict[str, Any]:
    doc = copy.deepcopy(base)
    if where == "stimulus":
        doc.setdefault("stimuli", {})["deep"] = _nested(depth, as_dict=True)
    elif where == "offset":
        doc.setdefault("hologram", {})["offset_um"] = _nested(depth, as_dict=False)
    else:
        doc["title"] = _nested(depth, as_dict=False)
    return doc


def deep_dict_cases() -> st.SearchStrategy[FuzzCase]:
    """Dictionaries with a value nested thousands deep."""
    return st.builds(
        lambda base, depth, where: FuzzCase("dict", _deep_dict(base, depth, where)),
        st.sampled_from(BASE_DOCS),
        st.sampled_from([40, 500, 1000, 5000]),
        st.sampled_from(["stimulus", "offset", "title"]),
    )


def deep_text_cases() -> st.SearchStrategy[FuzzCase]:
    """Arrays or inline tables nested thousands deep, written as text."""

    def nest(depth: int, tables: bool) -> str:
        if tables:
            return "x = " + "{ a = " * depth + "1" + " }" * depth + "\n"
        return "x = " + "[" * depth + "]" * depth + "\n"

    return st.builds(
        lambda head, depth, tables: FuzzCase("text", head + nest(depth, tables)),
        st.sampled_from(["", BASE_TEXTS[0]]),
        st.sampled_from([10, 500, 1000, 5000, 50_000]),
        st.booleans(),
    )


def random_byte_cases() -> st.SearchStrategy[FuzzCase]:
    """Random bytes, sometimes after the start of a valid file."""
    head = st.sampled_from([b"", b'format = "stimplan-sequence/1"\n', b"\xef\xbb\xbf", b"["])
    return st.builds(
        lambda h, b, how: FuzzCase(how, h + b),
        head,
        st.binary(max_size=400),
        st.sampled_from(["file", "text"]),
    )


def fuzz_cases() -> st.SearchStrategy[FuzzCase]:
    """All kinds of case."""
    return st.one_of(
        dict_cases(),
        text_cases(),
        file_cases(),
        truncated_cases(),
        deep_dict_cases(),
        deep_text_cases(),
        random_byte_cases(),
    )


# --------------------------------------------------------------------------
# The property
# --------------------------------------------------------------------------

# The loader's guards around code that raised something unexpected.
_GUARDED = re.compile(r"cannot be used \(\w+:|^\w+(Error|Exception): ")


def run_case(case: FuzzCase, *, folder: Path) -> Any:
    """Read the case with stimplan (``folder`` holds the file of a ``"file"`` case)."""
    if case.how == "dict":
        return sequence_from_dict(case.data)
    if case.how == "text":
        return parse_sequence(case.data)
    path = folder / "case.toml"
    path.write_bytes(case.data)
    return load_sequence(path)


def _error_problem(exc: StimplanError) -> str | None:
    parts = getattr(exc, "errors", None) or [exc]
    for err in [exc, *parts]:
        if not isinstance(err, StimplanError):
            return f"not a StimplanError inside: {err!r}"
        if not isinstance(err.field, str) or not err.field:
            return f"no key path: {err.field!r}"
        if _GUARDED.search(err.detail or ""):
            return f"unexpected exception behind {err.field}: {err.detail}"
    str(exc)
    return None


def case_problem(case: FuzzCase, *, folder: Path) -> str | None:
    """``None`` when the case keeps the property, else what went wrong (with a traceback)."""
    limit = sys.getrecursionlimit()
    try:
        result = run_case(case, folder=folder)
    except StimplanError as exc:
        try:
            return _error_problem(exc)
        except Exception:
            return "the message cannot be formatted:\n" + traceback.format_exc()
    except Exception:
        return traceback.format_exc()
    finally:
        sys.setrecursionlimit(limit)
    if not isinstance(result, SequenceSpec):
        return f"returned {type(result).__name__}, not a SequenceSpec"
    return None
