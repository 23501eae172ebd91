"""Reading a sequence file: TOML text or a dict to a validated :class:`SequenceSpec`."""

from __future__ import annotations

import os
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from .. import validate
from ..baseline import MASK_PRESETS
from ..errors import ConfigError
from ..exposure import check_wavelength
from ..implant import pixel_responsivity
from ..optics.system import Eye, Illumination, OpticalSystem
from ..tolerance import ToleranceRanges
from .keys import (
    MAX_DOTS_PER_LINE,
    MAX_FILE_BYTES,
    MAX_NESTING,
    SEED_MAX,
)
from .lines import LineIndex, dotted_line, nested_line, syntax_error
from .model import SequenceSpec
from .report import ErrorReport, SequenceError, build_collecting, key_text, rebase_path
from .sections import (
    make_limits,
    make_mask,
    read_eye,
    read_hologram,
    read_implant,
    read_optics,
    read_order,
    read_section,
    read_steps,
    read_stimuli,
    read_timing,
)
from .timeline import (
    check_counts,
    expand_timeline,
)

__all__ = ["load_sequence", "parse_sequence", "sequence_from_dict"]


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
        if p.is_dir():
            raise IsADirectoryError("a folder, not a sequence file")
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
    index = LineIndex(text)
    dotted = dotted_line(text)
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
    nested = nested_line(text)
    if nested is not None:
        no, depth = nested
        raise SequenceError(
            [
                ConfigError(
                    index.table_at(no) or "sequence",
                    None,
                    f"arrays and inline tables nested at most {MAX_NESTING} deep",
                    f"{depth} levels open on this line",
                    line=no,
                )
            ],
            source,
        )
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SequenceError([syntax_error(exc, text, index)], source) from None
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


def _from_raw(
    raw: dict[str, Any],
    index: LineIndex | None,
    base_dir: str | os.PathLike[str] | None,
    source: str | None,
) -> SequenceSpec:
    report = ErrorReport(index)
    deep = _too_deep(raw)
    if deep is not None:
        report.add(
            deep, None, f"tables and arrays nested at most {MAX_NESTING} deep", "nested deeper"
        )
        raise SequenceError(report.errors, source)
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


def _too_deep(raw: Mapping[str, Any]) -> str | None:
    """Key path of the first table or array nested deeper than :data:`MAX_NESTING`."""
    stack: list[tuple[str, Any, int]] = [("", raw, 1)]
    while stack:
        path, node, depth = stack.pop()
        if depth > MAX_NESTING:
            return path
        if isinstance(node, Mapping):
            for key, val in node.items():
                name = key_text(key)
                stack.append((f"{path}.{name}" if path else name, val, depth + 1))
        elif isinstance(node, (list, tuple)):
            for i, val in enumerate(node):
                stack.append((f"{path}[{i}]", val, depth + 1))
    return None


def _assemble(
    report: ErrorReport, raw: dict[str, Any], base_dir: Path | None, source: str | None
) -> SequenceSpec | None:
    report.check_schema(raw)
    title = raw.get("title", "")
    seed = 0
    if "seed" in raw and "seed" not in report.refused:
        try:
            seed = validate.integer("seed", raw["seed"], lo=0, hi=SEED_MAX)
        except ConfigError as exc:
            report.add_exc(exc, "seed")
    slm, laser, relay = read_optics(report, raw, base_dir)
    eye_at = ()  # a preset eye's transmission is computed at the planned wavelength
    if laser is not None:
        # a sequence is planned with its exposure assessed: refuse, at the file's own
        # key and line, a wavelength whose limits are not implemented
        try:
            check_wavelength(laser.wavelength_nm, "optics.laser.wavelength_nm")
            eye_at = (laser.wavelength_nm,)
        except ConfigError as exc:
            report.add_exc(exc, "optics.laser.wavelength_nm")
    eye = read_eye(report, raw, *eye_at)
    system = None
    if None not in (slm, laser, relay, eye):
        remaps = {"slm": "optics.slm", "illumination": "optics.laser", "relay": "optics.relay"}

        def where(f: str) -> str:
            head = re.split(r"[.\[]", f, maxsplit=1)[0]
            return rebase_path(f, head, remaps[head]) if head in remaps else f

        system = build_collecting(
            report,
            OpticalSystem,
            dict(slm=slm, illumination=laser, relay=relay, eye=eye),
            "optics",
            where,
            retry=False,
        )
    implant, has_implant = read_implant(report, raw)
    if implant is not None and laser is not None and implant.responsivity_a_per_w is not None:
        # a responsivity above one electron per photon at the file's own wavelength
        try:
            pixel_responsivity(
                implant.responsivity_a_per_w,
                laser.wavelength_nm,
                field="implant.responsivity_a_per_w",
            )
        except ConfigError as exc:
            report.add_exc(exc, "implant.responsivity_a_per_w")
    holo = read_hologram(report, raw, seed, has_implant)
    mask = read_section(report, raw, "mask", make_mask, "mask", keep=("kind",))
    protocol = None
    if "limits" in raw:
        protocol = read_section(report, raw, "limits", make_limits, "protocol")
    tolerance = None
    if "tolerance" in raw:
        tolerance = read_section(report, raw, "tolerance", ToleranceRanges, "tolerance")
    shuffle, interleave, repeats = read_order(report, raw)
    timing = read_timing(report, raw)
    # With a broken [eye] or [implant] (already reported), stand-ins let the
    # stimuli's own values be checked; the specification is not built anyway.
    if implant is not None:
        pitch = implant.pitch_um
    else:
        pitch = 1.0 if has_implant else None
    stimuli = read_stimuli(report, raw, eye if eye is not None else Eye(), pitch, base_dir)
    defined = raw.get("stimuli")
    failed = {k for k in defined if k not in stimuli} if isinstance(defined, dict) else set()
    default_power = laser.power_mw if laser is not None else Illumination().power_mw
    steps = read_steps(
        report,
        raw,
        stimuli,
        failed,
        has_implant,
        default_power,
        allow_truncated_pulses=timing.allow_truncated_pulses,
    )
    if steps and not report.errors:
        check_counts(report, steps, repeats, timing.jitter_ms)
    if report.errors:
        return None
    spec = SequenceSpec(
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
        tolerance=tolerance,
        shuffle=shuffle,
        repeats=repeats,
        interleave=interleave,
        timing=timing,
        source_path=source,
        raw=raw,
    )
    if timing.slm_settle_ms > 0:
        # the settling is checked on the expanded timeline: here once, for the lines
        try:
            expand_timeline(spec)
        except SequenceError as exc:
            for err in exc.errors:
                report.add_exc(err, err.field)
            return None
    return spec
