"""A sequence expanded into frames in time order, each with its train of pulses."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ..exposure import Pulse
from .keys import (
    MAX_FRAMES,
    MAX_PULSES,
    PIECE_TOL_MS,
)
from .model import SequenceSpec, StepSpec
from .report import ErrorReport, SequenceError
from .settle import settling_errors
from .timing import JITTER_STREAM

__all__ = [
    "FrameSpec",
    "timeline_counts",
    "check_counts",
    "step_order",
    "trial_order",
    "trial_jitter_ms",
    "expand_timeline",
    "total_duration_ms",
]


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
    pulse_delay_ms : float
        Delay of the first pulse after the frame start, ms.
    jitter : bool
        True for the dark pause of a trial's start jitter.
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
    pulse_delay_ms: float = 0.0
    jitter: bool = False

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
        """Number of pulses, ``ceil((duration_ms - pulse_delay_ms) * rate_hz / 1000)``."""
        if self.is_blank or self.rate_hz <= 0 or self.pulse_ms <= 0:
            return 0
        if self.pulse_delay_ms >= self.duration_ms:
            return 0
        n = _pieces(self.duration_ms - self.pulse_delay_ms, 1000.0 / self.rate_hz)
        return int(n) if math.isfinite(n) else MAX_PULSES + 1

    def pulses(self) -> list[Pulse]:
        """The pulse train of the frame, absolute start times in ms.

        The train starts ``pulse_delay_ms`` after the frame start, one pulse
        of ``pulse_ms`` every ``1000 / rate_hz`` ms, while pulses start
        inside the frame. A pulse that would run past the end of the frame is
        cut there: a sequence allows that only with ``[timing]
        allow_truncated_pulses = true`` (:meth:`StepSpec.truncated_pulse`).
        A dark frame has none.

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
            offset = self.pulse_delay_ms + k * period
            width = min(self.pulse_ms, self.duration_ms - offset)
            out.append(Pulse(self.start_ms + offset, width))
        return out


def _pieces(total_ms: float, piece_ms: float) -> float:
    """How many pieces of ``piece_ms`` cover ``total_ms``, the last one cut: ``ceil``.

    A left-over shorter than ``PIECE_TOL_MS`` of a piece is rounding, not a
    piece. Returns ``inf`` for absurdly many.
    """
    r = total_ms / piece_ms
    if not math.isfinite(r) or r > 1e15:
        return math.inf
    return float(max(1, math.ceil(r - PIECE_TOL_MS)))


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


def _step_counts(step: StepSpec, jitter_ms: float = 0.0) -> tuple[float, float]:
    """Frames and pulses of one trial of a step (jitter and blank included), without expanding."""
    period = step.period_ms
    extra = (1.0 if step.blank_after_ms > 0 else 0.0) + (1.0 if jitter_ms > 0 else 0.0)
    delay = step.pulse_delay_ms
    if not step.alternating:
        return 1.0 + extra, _pieces(step.duration_ms - delay, period)
    n = _pieces(step.duration_ms, step.alternate_ms)
    if not math.isfinite(n):
        return math.inf, math.inf
    last = step.duration_ms - (n - 1) * step.alternate_ms
    pulses = (n - 1) * _pieces(step.alternate_ms - delay, period) + _pieces(last - delay, period)
    return n + extra, pulses


def timeline_counts(spec: SequenceSpec) -> tuple[float, float]:
    """Number of frames and of pulses of the expanded timeline, computed without expanding.

    Returns
    -------
    (float, float)
        Whole numbers, or ``inf`` for absurdly many.
    """
    return _counts(spec.steps, spec.repeats, spec.timing.jitter_ms)


def _counts(steps: Sequence[StepSpec], repeats: int, jitter_ms: float = 0.0) -> tuple[float, float]:
    frames = pulses = 0.0
    for step in steps:
        f, p = _step_counts(step, jitter_ms)
        frames += step.repeat * f
        pulses += step.repeat * p
    return frames * repeats, pulses * repeats


def _count_errors(
    steps: Sequence[StepSpec], repeats: int, jitter_ms: float = 0.0
) -> list[ConfigError]:
    frames, pulses = _counts(steps, repeats, jitter_ms)
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


def check_counts(
    report: ErrorReport, steps: Sequence[StepSpec], repeats: int, jitter_ms: float = 0.0
) -> None:
    for e in _count_errors(steps, repeats, jitter_ms):
        report.add_exc(e, e.field)


def step_order(spec: SequenceSpec) -> tuple[tuple[int, ...], ...]:
    """The order of the steps in each whole-sequence repeat.

    File order, or, with ``shuffle``, a permutation for each repeat drawn in
    turn from ``numpy.random.default_rng(seed)``. With ``interleave`` the
    steps in the order of their first trial (:func:`trial_order`).

    Returns
    -------
    tuple of tuple of int
        One tuple of step indices per repeat.
    """
    n = len(spec.steps)
    if spec.interleave:
        return tuple(tuple(dict.fromkeys(trials)) for trials in trial_order(spec))
    if not spec.shuffle:
        return tuple(tuple(range(n)) for _ in range(spec.repeats))
    rng = np.random.default_rng(spec.seed)
    return tuple(tuple(int(i) for i in rng.permutation(n)) for _ in range(spec.repeats))


def trial_order(spec: SequenceSpec) -> tuple[tuple[int, ...], ...]:
    """The trials of each whole-sequence repeat, as the step index of each, in time order.

    A trial is one repetition of a step. Without ``interleave`` each step's
    ``repeat`` trials run together, in the order of :func:`step_order`. With
    ``interleave``, the trials of a repeat in file order (``steps[0]``
    ``repeat`` times, then ``steps[1]`` ...) are permuted: for each repeat in
    turn, ``trials[rng.permutation(len(trials))]`` with
    ``rng = numpy.random.default_rng(seed)``.

    Returns
    -------
    tuple of tuple of int
        One tuple per repeat.
    """
    if not spec.interleave:
        return tuple(
            tuple(si for si in order for _ in range(spec.steps[si].repeat))
            for order in step_order(spec)
        )
    trials = np.array(
        [si for si, step in enumerate(spec.steps) for _ in range(step.repeat)], dtype=np.int64
    )
    rng = np.random.default_rng(spec.seed)
    return tuple(
        tuple(int(i) for i in trials[rng.permutation(len(trials))]) for _ in range(spec.repeats)
    )


def trial_jitter_ms(spec: SequenceSpec, n_trials: int) -> np.ndarray:
    """The start jitter of each trial in time order, ms, uniform in ``[0, jitter_ms)``.

    Drawn as ``rng.uniform(0, jitter_ms, n_trials)`` with ``rng =
    numpy.random.default_rng(numpy.random.SeedSequence(seed, spawn_key=(1,)))``
    (:data:`~stimplan.sequence.timing.JITTER_STREAM`), a stream apart from
    the order's, so the order does not change with the jitter. All zeros
    when ``jitter_ms`` is 0.

    References
    ----------
    .. [1] NumPy documentation, ``Generator.uniform`` (half-open interval
       ``[low, high)``) and ``SeedSequence``.
    """
    jitter = spec.timing.jitter_ms
    if jitter <= 0:
        return np.zeros(n_trials)
    seq = np.random.SeedSequence(spec.seed, spawn_key=(JITTER_STREAM,))
    return np.random.default_rng(seq).uniform(0.0, jitter, n_trials)


def expand_timeline(spec: SequenceSpec) -> tuple[FrameSpec, ...]:
    """The frames of a sequence in time order.

    Parameters
    ----------
    spec : SequenceSpec

    Returns
    -------
    tuple of FrameSpec
        Contiguous frames from 0 ms: for each whole-sequence repeat, the
        trials in :func:`trial_order`; each trial made of, with
        ``[timing] jitter_ms > 0``, a dark frame of its jitter
        (:func:`trial_jitter_ms`), one frame (or the alternating frames)
        and, if ``blank_after_ms > 0``, a dark frame.

    Raises
    ------
    SequenceError
        If the timeline would have more than :data:`MAX_FRAMES` frames or
        :data:`MAX_PULSES` pulses, or a pulse would start while the SLM
        settles after a hologram change (:mod:`stimplan.sequence.settle`).
    """
    errs = _count_errors(spec.steps, spec.repeats, spec.timing.jitter_ms)
    if errs:
        raise SequenceError(errs, spec.source_path)
    orders = trial_order(spec)
    jitters = trial_jitter_ms(spec, sum(len(o) for o in orders))
    parts_of = [_step_frames(step) for step in spec.steps]
    frames: list[FrameSpec] = []
    t = 0.0
    k = 0
    for cycle, order in enumerate(orders):
        done = [0] * len(spec.steps)
        for si in order:
            step = spec.steps[si]
            rep = done[si]
            done[si] += 1
            if spec.timing.jitter_ms > 0:
                wait = float(jitters[k])
                frames.append(_frame(len(frames), t, wait, step, None, si, rep, cycle, True))
                t += wait
            k += 1
            t0 = t
            for name, offset, dur in parts_of[si]:
                frames.append(_frame(len(frames), t0 + offset, dur, step, name, si, rep, cycle))
            t = t0 + step.duration_ms
            if step.blank_after_ms > 0:
                frames.append(
                    _frame(len(frames), t, step.blank_after_ms, step, None, si, rep, cycle)
                )
                t += step.blank_after_ms
    out = tuple(frames)
    dark = {name for name, st in spec.stimuli.items() if st.kind == "blank"}
    errs = settling_errors(out, spec.timing.slm_settle_ms, dark_names=dark)
    if errs:
        raise SequenceError(errs, spec.source_path)
    return out


def _frame(
    index: int,
    start: float,
    dur: float,
    step: StepSpec,
    name: str | None,
    si: int,
    rep: int,
    cycle: int,
    jitter: bool = False,
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
        pulse_delay_ms=step.pulse_delay_ms if lit else 0.0,
        jitter=jitter,
    )


def total_duration_ms(frames: Sequence[FrameSpec]) -> float:
    """Time from the start of the first frame to the end of the last, ms (0 for none)."""
    if not frames:
        return 0.0
    return max(f.end_ms for f in frames) - min(f.start_ms for f in frames)
