"""The validated sequence: its steps (:class:`StepSpec`) and the file (:class:`SequenceSpec`)."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from .. import validate
from ..baseline import MASK_PRESETS, AmplitudeMask
from ..errors import ConfigError
from ..exposure import ProtocolCap
from ..holography.ifta import IftaSettings
from ..implant import Implant
from ..optics.system import OpticalSystem
from ..stimuli.base import Stimulus
from ..tolerance import ToleranceRanges
from .keys import (
    FORMAT,
    IRRADIANCE_BASES,
    MAX_FRAMES,
    PIECE_TOL_MS,
    SEED_MAX,
)
from .schema import IFTA_KEYS
from .timing import TimingSpec

__all__ = ["pair_um", "check_step_values", "truncation_error", "StepSpec", "SequenceSpec"]


def pair_um(path: str, value: Any) -> tuple[float, float]:
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise ConfigError(path, value, "a pair [x, y] of numbers (µm)")
    return (
        validate.physical(f"{path}[0]", value[0], "retinal_position_um"),
        validate.physical(f"{path}[1]", value[1], "retinal_position_um"),
    )


def _whole(total_ms: float, piece_ms: float) -> bool:
    """Whether ``total_ms`` is a whole number of ``piece_ms`` (to ``PIECE_TOL_MS`` of a piece)."""
    r = total_ms / piece_ms
    return math.isfinite(r) and abs(r - round(r)) <= PIECE_TOL_MS * max(1.0, r)


def check_step_values(prefix: str, d: Mapping[str, Any], errors: list[ConfigError]) -> dict:
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

    for name, quantity in (
        ("duration_ms", "duration_ms"),
        ("pulse_ms", "pulse_ms"),
        ("rate_hz", "rate_hz"),
        ("power_mw", "laser_power_mw"),
        ("irradiance_mw_per_mm2", "irradiance_mw_per_mm2"),
        ("alternate_ms", "duration_ms"),
        ("blank_after_ms", "blank_ms"),
        ("pulse_delay_ms", "pulse_delay_ms"),
    ):
        take(name, lambda f, x, q=quantity: validate.physical(f, x, q))
    take("repeat", lambda f, x: validate.integer(f, x, lo=1, hi=MAX_FRAMES))
    take("irradiance_basis", lambda f, x: validate.choice(f, x, IRRADIANCE_BASES))
    pulse, rate = out.get("pulse_ms"), out.get("rate_hz")
    dur, alt = out.get("duration_ms"), out.get("alternate_ms")
    _check_delay(prefix, out.get("pulse_delay_ms"), pulse, rate, alt or dur, errors)
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
    if alt is not None and dur is not None and alt < dur and not _whole(dur, alt):
        n = math.floor(dur / alt)
        errors.append(
            ConfigError(
                f"{prefix}.duration_ms",
                dur,
                f"a whole number of alternate_ms ({alt:g} ms), "
                f"e.g. {n * alt:g} or {(n + 1) * alt:g}",
                f"the last frame would be cut to {dur - n * alt:g} ms",
            )
        )
    if alt is not None and rate is not None and not _whole(alt, 1000.0 / rate):
        errors.append(
            ConfigError(
                f"{prefix}.alternate_ms",
                alt,
                f"a whole number of pulse periods (1000 / rate_hz = {1000.0 / rate:g} ms)",
                "each frame restarts the pulse train, so the rate would change at every frame",
            )
        )
    if alt is not None and pulse is not None and pulse > alt:
        errors.append(ConfigError(f"{prefix}.pulse_ms", pulse, f"<= alternate_ms ({alt:g} ms)"))
    return out


def _check_delay(
    prefix: str,
    delay: float | None,
    pulse: float | None,
    rate: float | None,
    frame_ms: float | None,
    errors: list[ConfigError],
) -> None:
    """``pulse_delay_ms`` under one period, and the first pulse whole inside every frame."""
    if not delay:
        return
    if rate is not None and delay >= 1000.0 / rate:
        errors.append(
            ConfigError(
                f"{prefix}.pulse_delay_ms",
                delay,
                f"< 1000 / rate_hz = {1000.0 / rate:g} ms",
                "a delay of a whole period or more drops the first pulse",
            )
        )
    elif pulse is not None and frame_ms is not None and delay + pulse > frame_ms * (1 + 1e-12):
        errors.append(
            ConfigError(
                f"{prefix}.pulse_delay_ms",
                delay,
                f"<= {frame_ms - pulse:g} ms (the frame, {frame_ms:g} ms, minus pulse_ms)",
                "the first pulse must end inside its frame",
            )
        )


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
    pulse_delay_ms : float
        Delay of the first pulse after the start of each frame, ms, ``>= 0``
        and under one period; the first pulse must end inside the frame.
        Moves the pulses clear of an SLM's settling after a hologram change.
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
    pulse_delay_ms: float = 0.0

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
        for name in ("duration_ms", "pulse_ms", "rate_hz"):
            if getattr(self, name) is None:
                raise ConfigError(f"step.{name}", None, "a number > 0", "missing")
        errors: list[ConfigError] = []
        given = {f.name: getattr(self, f.name) for f in _STEP_FIELDS}
        vals = check_step_values("step", given, errors)
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

    @property
    def frame_ms(self) -> float:
        """Length of each frame of one repetition: ``alternate_ms``, else ``duration_ms``."""
        return self.alternate_ms if self.alternating else self.duration_ms

    def truncated_pulse(self) -> tuple[float, float] | None:
        """The last pulse of a frame if the frame's end cuts it, else ``None``.

        Every frame of the step has the same length (:attr:`frame_ms`) and
        its train: pulses at ``pulse_delay_ms + k * period_ms`` while they
        start inside the frame.

        Returns
        -------
        (float, float) or None
            Start of the cut pulse from the frame start, ms, and the width
            the frame leaves it, ms.
        """
        frame, period = self.frame_ms, self.period_ms
        n = max(1, math.ceil((frame - self.pulse_delay_ms) / period - PIECE_TOL_MS))
        start = self.pulse_delay_ms + (n - 1) * period
        left = frame - start
        if left >= self.pulse_ms - PIECE_TOL_MS * period:
            return None
        return start, left

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
        out.update(
            repeat=self.repeat,
            blank_after_ms=self.blank_after_ms,
            pulse_delay_ms=self.pulse_delay_ms,
        )
        return out


_STEP_FIELDS = dataclasses.fields(StepSpec)


_ALLOW_CUT = "or set [timing] allow_truncated_pulses = true"


def truncation_error(
    prefix: str, step: StepSpec, *, field: str | None = None, remedy: str = _ALLOW_CUT
) -> ConfigError | None:
    """The error for a step whose frames cut their last pulse (``None`` if none is cut).

    The error names the key to change (``field`` instead, when given: a
    panel's own label), the cut and the lengths that hold whole pulses;
    ``remedy`` is added to the detail (by default that ``[timing]
    allow_truncated_pulses = true`` accepts the cut).
    """
    cut = step.truncated_pulse()
    if cut is None:
        return None
    start, left = cut
    detail = (
        f"the pulse at {start:g} ms of each frame would be cut from {step.pulse_ms:g} to "
        f"{left:g} ms"
    ) + (f"; {remedy}" if remedy else "")
    if step.alternating:
        most = step.period_ms - step.pulse_ms
        return ConfigError(
            field or f"{prefix}.pulse_delay_ms",
            step.pulse_delay_ms,
            f"<= {most:g} ms (1000 / rate_hz minus pulse_ms), so each frame of "
            f"alternate_ms = {step.alternate_ms:g} ends on a whole pulse",
            detail,
        )
    longer = start + step.pulse_ms
    shorter = start - step.period_ms + step.pulse_ms
    fits = f"e.g. {shorter:g} or {longer:g}" if shorter > 0 else f"e.g. {longer:g}"
    return ConfigError(
        field or f"{prefix}.duration_ms",
        step.duration_ms,
        f"a length that ends on a whole pulse, {fits}",
        detail,
    )


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
    tolerance : ToleranceRanges or None
        Ranges of the tolerance analysis (``[tolerance]``), and whether the
        implant-aware holograms are designed to survive their defocus.
    shuffle : bool
        Shuffle the step order (from ``seed``): each step keeps its
        repetitions together.
    interleave : bool
        Shuffle the trials (every repetition of every step) within each
        whole-sequence repeat (from ``seed``); not with ``shuffle``.
    repeats : int
        Whole-sequence repeats.
    timing : TimingSpec
        SLM settling, trial jitter and whether truncated pulses are allowed.
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
    tolerance: ToleranceRanges | None = None
    shuffle: bool = False
    repeats: int = 1
    interleave: bool = False
    timing: TimingSpec = field(default_factory=TimingSpec)
    source_path: str | None = field(default=None, compare=False)
    raw: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)

    def __post_init__(self) -> None:
        f = object.__setattr__
        if not isinstance(self.title, str):
            raise ConfigError("title", self.title, "a string")
        f(self, "seed", validate.integer("seed", self.seed, lo=0, hi=SEED_MAX))
        for name, cls in (
            ("system", OpticalSystem),
            ("ifta", IftaSettings),
            ("mask", AmplitudeMask),
            ("timing", TimingSpec),
        ):
            if not isinstance(getattr(self, name), cls):
                raise ConfigError(name, getattr(self, name), f"a {cls.__name__}")
        if self.implant is not None and not isinstance(self.implant, Implant):
            raise ConfigError("implant", self.implant, "an Implant or None")
        if self.protocol is not None and not isinstance(self.protocol, ProtocolCap):
            raise ConfigError("limits", self.protocol, "a ProtocolCap or None")
        if self.tolerance is not None:
            if not isinstance(self.tolerance, ToleranceRanges):
                raise ConfigError("tolerance", self.tolerance, "a ToleranceRanges or None")
            self.tolerance.check_zero_order(self.system)
            if self.tolerance.robust_design and not self.implant_aware:
                raise ConfigError(
                    "tolerance.robust_design",
                    True,
                    "false without an implant-aware hologram",
                    "the robust design aims light at the photodiodes' cores",
                )
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
        f(self, "implant_aware", validate.boolean("hologram.implant_aware", self.implant_aware))
        if self.implant_aware and self.implant is None:
            raise ConfigError("hologram.implant_aware", True, "false without an implant")
        f(self, "oversample", validate.integer("hologram.oversample", self.oversample, lo=2, hi=8))
        f(self, "offset_um", pair_um("hologram.offset_um", self.offset_um))
        f(
            self,
            "on_threshold",
            validate.number("hologram.on_threshold", self.on_threshold, lo=0, hi=1, lo_open=True),
        )
        f(self, "shuffle", validate.boolean("order.shuffle", self.shuffle))
        f(self, "repeats", validate.integer("order.repeats", self.repeats, lo=1, hi=MAX_FRAMES))
        f(self, "interleave", validate.boolean("order.interleave", self.interleave))
        if not self.timing.allow_truncated_pulses:
            for i, step in enumerate(self.steps):
                err = truncation_error(f"steps[{i}]", step)
                if err is not None:
                    raise err
        if self.shuffle and self.interleave:
            raise ConfigError(
                "order.interleave",
                True,
                "false with shuffle = true",
                "interleave already shuffles every trial; give one of the two",
            )

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
        hologram = {k: getattr(ifta, k) for k in IFTA_KEYS}
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
        if self.tolerance is not None:
            out["tolerance"] = self.tolerance.to_dict()
        out["order"] = {
            "shuffle": self.shuffle,
            "interleave": self.interleave,
            "repeats": self.repeats,
        }
        out["timing"] = self.timing.to_dict()
        out["stimuli"] = {k: st.to_dict() for k, st in self.stimuli.items() if ":" not in k}
        out["steps"] = [step.to_dict() for step in self.steps]
        return out
