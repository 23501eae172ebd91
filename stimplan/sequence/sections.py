"""Building the objects of each section of a sequence file.

Optics, eye, implant, hologram, mask, limits, order, timing, stimuli and steps.
"""

from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

from .. import validate
from ..baseline import MASK_PRESETS, AmplitudeMask
from ..errors import ConfigError, StimplanError
from ..exposure import ProtocolCap
from ..holography.ifta import IftaSettings
from ..implant import IMPLANT_PRESETS, Implant, implant_preset
from ..optics.eye import EYE_PRESETS, PRESET_WAVELENGTH_NM, eye_preset
from ..optics.system import SLM, Eye, Illumination, Relay
from ..stimuli.base import STIMULUS_KINDS, Stimulus
from ..stimuli.registry import stimulus_from_dict
from .keys import MAX_FRAMES, NAME_RE, PARTNER_SUFFIXES
from .lines import key_parts
from .model import StepSpec, check_step_values, pair_um, truncation_error
from .report import ErrorReport, build_collecting, rebase_path
from .schema import IFTA_KEYS
from .timing import TimingSpec

__all__ = [
    "make_mask",
    "make_limits",
    "read_optics",
    "read_eye",
    "read_implant",
    "read_hologram",
    "read_section",
    "read_order",
    "read_timing",
    "read_stimuli",
    "read_steps",
]


def _resolve_path(value: Any, base_dir: Path | None) -> Any:
    """A relative file path joined to ``base_dir``; anything else unchanged."""
    if not isinstance(value, str) or not value or base_dir is None or "\x00" in value:
        return value
    p = Path(value)
    return value if p.is_absolute() else str(base_dir / p)


def _make_slm(**kw: Any) -> SLM:
    if "bit_depth" in kw:
        if "phase_levels" in kw:
            raise ConfigError(
                "slm.bit_depth", kw["bit_depth"], "either bit_depth or phase_levels, not both"
            )
        bits = kw.pop("bit_depth")
        return SLM.from_bit_depth(bits, **kw)
    return SLM(**kw)


def _make_eye(wavelength_nm: float = PRESET_WAVELENGTH_NM, **kw: Any) -> Eye:
    preset = kw.pop("preset", None)
    fl = kw.pop("focal_length_mm", None)
    if "name" in kw and not isinstance(kw["name"], str):
        raise ConfigError("eye.name", kw["name"], "a string")
    if fl is not None:
        if "um_per_deg" in kw:
            raise ConfigError(
                "eye.focal_length_mm", fl, "either um_per_deg or focal_length_mm, not both"
            )
        kw["um_per_deg"] = validate.physical("eye.focal_length_mm", fl, "eye_focal_length_mm") * (
            1e3 * math.pi / 180.0
        )
    if preset is not None:
        if not isinstance(preset, str):
            raise ConfigError("eye.preset", preset, "one of " + ", ".join(map(repr, EYE_PRESETS)))
        return eye_preset(preset, wavelength_nm=wavelength_nm, **kw)
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


def make_mask(**kw: Any) -> AmplitudeMask:
    kind = validate.choice("mask.kind", kw.pop("kind", "lcd"), tuple(MASK_PRESETS))
    return dataclasses.replace(MASK_PRESETS[kind], **kw)


def make_limits(**kw: Any) -> ProtocolCap:
    for name in ("name", "source"):
        if name in kw and not isinstance(kw[name], str):
            raise ConfigError(f"protocol.{name}", kw[name], "a string")
    return ProtocolCap(**kw)


def read_optics(
    report: ErrorReport, raw: Mapping[str, Any], base_dir: Path | None
) -> tuple[Any, ...]:
    optics = report.table(raw, "optics", "optics")
    if optics is None:
        return None, None, None
    out = []
    for key, make, old in (
        ("slm", _make_slm, "slm"),
        ("laser", Illumination, "illumination"),
        ("relay", Relay, "relay"),
    ):
        path = f"optics.{key}"
        tbl = report.table(optics, key, path)
        if tbl is None:
            out.append(None)
            continue
        kw = report.usable(tbl, path)
        for fkey in ("lut_file", "amplitude_file", "correction_phase_file"):
            if fkey in kw:
                kw[fkey] = _resolve_path(kw[fkey], base_dir)
        out.append(
            build_collecting(
                report,
                make,
                kw,
                path,
                lambda f, o=old, p=path: rebase_path(f, o, p),
                dropped=len(kw) < len(tbl),
            )
        )
    return tuple(out)


def read_eye(
    report: ErrorReport, raw: Mapping[str, Any], wavelength_nm: float = PRESET_WAVELENGTH_NM
) -> Eye | None:
    """The ``[eye]`` section; a preset's transmission is computed at ``wavelength_nm``."""
    if "eye" not in raw:  # reported by the schema
        return None
    tbl = report.table(raw, "eye", "eye")
    if tbl is None:
        return None
    kw = report.usable(tbl, "eye")
    return build_collecting(
        report,
        lambda **kw: _make_eye(wavelength_nm, **kw),
        kw,
        "eye",
        lambda f: rebase_path(f, "eye", "eye"),
        keep=("preset",),
        dropped=len(kw) < len(tbl),
    )


def read_implant(report: ErrorReport, raw: Mapping[str, Any]) -> tuple[Implant | None, bool]:
    """The implant (or None) and whether the section was given."""
    if "implant" not in raw:
        return None, False
    tbl = report.table(raw, "implant", "implant")
    if tbl is None:
        return None, True
    kw = report.usable(tbl, "implant")
    imp = build_collecting(
        report,
        _make_implant,
        kw,
        "implant",
        lambda f: rebase_path(f, "implant", "implant"),
        retry=False,
        dropped=len(kw) < len(tbl),
    )
    return imp, True


def read_hologram(
    report: ErrorReport, raw: Mapping[str, Any], seed: int, has_implant: bool
) -> dict[str, Any]:
    out: dict[str, Any] = {
        "ifta": None,
        "implant_aware": has_implant,
        "oversample": 2,
        "offset_um": (0.0, 0.0),
        "on_threshold": 0.5,
    }
    given = report.table(raw, "hologram", "hologram")
    if given is None:
        return out
    tbl = report.usable(given, "hologram")

    def check(key: str, fn: Callable[[str, Any], Any]) -> None:
        if key in tbl:
            try:
                out[key] = fn(f"hologram.{key}", tbl[key])
            except StimplanError as exc:
                report.add_exc(exc, exc.field)
            except Exception as exc:
                report.add_unexpected(f"hologram.{key}", exc)

    check("implant_aware", validate.boolean)
    check("oversample", lambda f, x: validate.integer(f, x, lo=2, hi=8))
    check("on_threshold", lambda f, x: validate.number(f, x, lo=0, hi=1, lo_open=True))
    check("offset_um", pair_um)
    if out["implant_aware"] and not has_implant:
        report.add(
            "hologram.implant_aware", True, "false without an [implant]", "nothing to be aware of"
        )
    kw = {k: val for k, val in tbl.items() if k in IFTA_KEYS}
    aware = bool(out["implant_aware"]) and has_implant

    def make(**kw: Any) -> IftaSettings:
        return IftaSettings(seed=seed, group_weighting=aware, **kw)

    out["ifta"] = build_collecting(
        report,
        make,
        kw,
        "hologram",
        lambda f: rebase_path(f, "hologram", "hologram"),
        dropped=len(tbl) < len(given),
    )
    return out


def read_section(
    report: ErrorReport,
    raw: Mapping[str, Any],
    key: str,
    make: Callable[..., Any],
    old: str,
    *,
    keep: Sequence[str] = (),
) -> Any:
    """A table given straight to a constructor (``mask``, ``limits``)."""
    tbl = report.table(raw, key, key)
    if tbl is None:
        return None
    kw = report.usable(tbl, key)
    return build_collecting(
        report,
        make,
        kw,
        key,
        lambda f: rebase_path(f, old, key),
        keep=keep,
        dropped=len(kw) < len(tbl),
    )


def read_order(report: ErrorReport, raw: Mapping[str, Any]) -> tuple[bool, bool, int]:
    """``shuffle``, ``interleave`` and ``repeats`` of ``[order]``."""
    shuffle, interleave, repeats = False, False, 1
    tbl = report.table(raw, "order", "order")
    if not tbl:
        return shuffle, interleave, repeats
    tbl = report.usable(tbl, "order")
    try:
        if "shuffle" in tbl:
            shuffle = validate.boolean("order.shuffle", tbl["shuffle"])
    except ConfigError as exc:
        report.add_exc(exc, exc.field)
    try:
        if "interleave" in tbl:
            interleave = validate.boolean("order.interleave", tbl["interleave"])
    except ConfigError as exc:
        report.add_exc(exc, exc.field)
    if shuffle and interleave:
        report.add(
            "order.interleave",
            True,
            "false with shuffle = true",
            "interleave already shuffles every trial; give one of the two",
        )
    try:
        if "repeats" in tbl:
            repeats = validate.integer("order.repeats", tbl["repeats"], lo=1, hi=MAX_FRAMES)
    except ConfigError as exc:
        report.add_exc(exc, exc.field)
    return shuffle, interleave, repeats


def read_timing(report: ErrorReport, raw: Mapping[str, Any]) -> TimingSpec:
    """``[timing]`` (the defaults when it is absent or has an error, which is reported)."""
    if "timing" not in raw:
        return TimingSpec()
    timing = read_section(report, raw, "timing", TimingSpec, "timing")
    return timing if timing is not None else TimingSpec()


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


def read_stimuli(
    report: ErrorReport,
    raw: Mapping[str, Any],
    eye: Eye | None,
    pitch_um: float | None,
    base_dir: Path | None,
) -> dict[str, Stimulus]:
    out: dict[str, Stimulus] = {}
    tbl = report.table(raw, "stimuli", "stimuli")
    if not tbl:  # absent or not a table: reported by the schema
        return out
    kinds = ", ".join(STIMULUS_KINDS)
    for name, body in tbl.items():
        path = f"stimuli.{name}"
        if not isinstance(name, str) or not NAME_RE.fullmatch(name):
            report.add(path, name, "a name of letters, digits, '_' and '-'", "':' names partners")
            continue
        if not isinstance(body, dict) or report.has_refused(f"{path}.kind"):
            continue  # reported by the schema
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
                missing = key_parts(m.group(1).split(" and ")[0])[0]
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


def read_steps(
    report: ErrorReport,
    raw: Mapping[str, Any],
    stimuli: dict[str, Stimulus],
    failed: set[str],
    has_implant: bool,
    default_power_mw: float,
    allow_truncated_pulses: bool = False,
) -> list[StepSpec]:
    items = raw.get("steps")
    if "steps" in report.refused or not isinstance(items, list):
        return []  # reported by the schema
    out: list[StepSpec] = []
    for i, given in enumerate(items):
        prefix = f"steps[{i}]"
        n_before = len(report.errors)
        if not isinstance(given, dict) or prefix in report.refused:
            continue  # reported by the schema
        item = report.usable(given, prefix)
        names = _step_stimuli(report, given, item, prefix, stimuli, failed)
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
        vals = check_step_values(prefix, item, errs)
        for e in errs:
            report.add_exc(e, e.field)
        if len(report.errors) > n_before or names is None or report.has_refused(prefix):
            continue
        if not has_power and not has_irr:
            vals["power_mw"] = default_power_mw
        try:
            step = StepSpec(stimuli=names, **vals)
            cut = None if allow_truncated_pulses else truncation_error(prefix, step)
            if cut is not None:
                report.add_exc(cut, cut.field)
            out.append(step)
        except StimplanError as exc:
            report.add_exc(exc, rebase_path(exc.field, "step", prefix))
        except Exception as exc:
            report.add_unexpected(prefix, exc)
    return out


def _step_stimuli(
    report: ErrorReport,
    given: Mapping[str, Any],
    item: Mapping[str, Any],
    prefix: str,
    stimuli: dict[str, Stimulus],
    failed: set[str],
) -> tuple[str, ...] | None:
    """The stimulus names of a step, each checked (partners resolved into ``stimuli``).

    ``given`` is the step as written, ``item`` what the schema left of it.
    """
    if ("stimulus" in given) == ("alternate" in given):
        report.add(
            f"{prefix}.stimulus",
            given.get("stimulus"),
            'exactly one of stimulus = "<name>" and alternate = ["<a>", "<b>"]',
            "both given" if "stimulus" in given else "missing",
        )
        return None
    if ("stimulus" in item) != ("stimulus" in given):
        return None  # refused by the schema
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
