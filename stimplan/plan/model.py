"""What a plan holds: per-stimulus results, per-frame powers and the whole plan."""

from __future__ import annotations

import copy
from dataclasses import dataclass, field

import numpy as np

from ..budget import LightBudget
from ..cautions import CAUTIONS
from ..comparison import ProjectorFigures
from ..errors import ConfigError
from ..exposure import (
    ExposureAssessment,
)
from ..gain import GainFactors
from ..metrics import PatternMetrics
from .spool import (
    Spooled,
    spooled_value,
)

__all__ = ["StimulusPlan", "FramePlan", "Plan"]


class StimulusPlan:
    """One distinct stimulus: its hologram and what it gives per mW of laser power.

    Attributes
    ----------
    name : str
        First sequence name of the stimulus (others may share it).
    hologram_index : int
        Page of the hologram stack.
    target : Target
    hologram : Hologram
    prediction : RetinalPrediction
        At :data:`REFERENCE_POWER_MW` (1 mW) of laser power.
    metrics : PatternMetrics
    mask_prediction : MaskPrediction
        The amplitude mask at 1 mW.
    on : ndarray of bool or None
        ON implant pixels.
    hologram_figures, mask_figures : ProjectorFigures or None
        Per-pixel figures at 1 mW (None without an implant).
    readout : PixelReadout or None
        Hologram readout at 1 mW.
    gain : GainFactors or None
        The hologram's ON-pixel gain over the mask as efficiency × area ×
        coverage (None without ON pixels).
    budget : LightBudget or None
        Where the light goes at 1 mW on the SLM, laser to ON photodiodes.
    timings_s : dict
        Seconds spent on this hologram's design (``holograms``), prediction
        (``predictions``) and readouts with the mask baseline (``readouts``).
    grid : RetinalGrid
        The prediction grid.

    Notes
    -----
    In a plan made with ``store="disk"`` the four large parts (target,
    hologram, prediction, mask prediction) live in files of the plan's spool
    folder and are read back on each use, so a long sequence holds only the
    small figures in memory.
    """

    def __init__(
        self,
        name: str,
        hologram_index: int,
        target,
        hologram,
        prediction,
        metrics: PatternMetrics,
        mask_prediction,
        on: np.ndarray | None = None,
        hologram_figures: ProjectorFigures | None = None,
        mask_figures: ProjectorFigures | None = None,
        readout: object | None = None,
        gain: GainFactors | None = None,
        budget: LightBudget | None = None,
        timings_s: dict | None = None,
    ) -> None:
        self.name = name
        self.hologram_index = hologram_index
        self.grid = prediction.grid  # the prediction grid, kept when the maps are spooled
        self.prediction_account = prediction.account
        self._parts = {
            "target": target,
            "hologram": hologram,
            "prediction": prediction,
            "mask_prediction": mask_prediction,
        }
        self.metrics = metrics
        self.on = on
        self.hologram_figures = hologram_figures
        self.mask_figures = mask_figures
        self.readout = readout
        self.gain = gain
        self.budget = budget
        self.timings_s = dict(timings_s or {})

    target = property(lambda self: spooled_value(self._parts["target"]), doc="The Target.")
    hologram = property(lambda self: spooled_value(self._parts["hologram"]), doc="The Hologram.")
    prediction = property(
        lambda self: spooled_value(self._parts["prediction"]), doc="RetinalPrediction at 1 mW."
    )
    mask_prediction = property(
        lambda self: spooled_value(self._parts["mask_prediction"]), doc="MaskPrediction at 1 mW."
    )

    @property
    def spooled(self) -> bool:
        return any(isinstance(v, Spooled) for v in self._parts.values())

    def spool_to(self, folder: str) -> StimulusPlan:
        """This plan with its large parts written to files in ``folder``."""
        out = copy.copy(self)
        out._parts = {
            k: (
                v
                if isinstance(v, Spooled)
                else Spooled.write(v, folder, f"{self.hologram_index:05d}-{k}")
            )
            for k, v in self._parts.items()
        }
        return out

    def on_irradiance_per_mw(self, basis: str = "mean") -> float:
        """ON-pixel retinal irradiance per mW of laser power ("mean" or "min")."""
        if self.readout is None or self.on is None:
            raise ConfigError("irradiance_mw_per_mm2", None, "an implant to define ON pixels")
        if self.hologram_figures is None or not self.on.any():
            raise ConfigError(
                "irradiance_mw_per_mm2",
                self.name,
                "a stimulus that turns at least one implant pixel ON",
                "it lights no pixel's photodiode half: give a laser power instead",
            )
        irr = np.asarray(self.readout.mean_irradiance_mw_per_mm2)[self.on]
        if basis == "min":
            return float(irr.min())
        return float(self.hologram_figures.on_irradiance_mw_per_mm2)

    def mask_on_irradiance_per_mw(self, basis: str = "mean") -> float:
        """The same for the amplitude mask."""
        if self.mask_figures is None:
            return float("nan")
        return float(self.mask_figures.on_irradiance_mw_per_mm2)


@dataclass(frozen=True)
class FramePlan:
    """One frame of the timeline, resolved.

    ``stimulus`` is ``None`` and ``hologram_index`` is -1 for a dark pause.
    ``step_index`` is the step of the file the frame comes from (-1 if
    unknown); ``pulse_delay_ms`` the delay of its first pulse after its start.
    """

    index: int
    start_ms: float
    duration_ms: float
    pulse_ms: float
    rate_hz: float
    power_mw: float
    stimulus: str | None
    hologram_index: int
    pulses: tuple = field(repr=False, default=())
    target_irradiance_mw_per_mm2: float | None = None
    on_pixel_power_uw: float | None = None
    mask_on_pixel_power_uw: float | None = None
    step_index: int = -1
    pulse_delay_ms: float = 0.0

    @property
    def lit(self) -> bool:
        return self.stimulus is not None and self.power_mw > 0


@dataclass(frozen=True, eq=False)
class Plan:
    """A planned sequence.

    Attributes
    ----------
    spec : SequenceSpec
    stimuli : dict of str to StimulusPlan
        By sequence name (names of identical stimuli share one plan).
    holograms : tuple of StimulusPlan
        The distinct holograms in stack order.
    frames : tuple of FramePlan
    exposure : ExposureAssessment or None
        The hologram sequence against the limits (None if nothing is lit).
    evaluations : dict
        Assessments asked for later, kept for the next caller
        (:mod:`stimplan.plan.evaluate`: the mask, each hologram alone).

    A plan planned with ``store="disk"`` keeps its large arrays in a spool
    folder until :meth:`close` (or the end of a ``with`` block).
    """

    spec: object
    stimuli: dict[str, StimulusPlan]
    holograms: tuple[StimulusPlan, ...]
    frames: tuple[FramePlan, ...]
    exposure: ExposureAssessment | None
    cautions: str = CAUTIONS
    spool: object = field(default=None, repr=False)
    timings_s: dict = field(default_factory=dict)
    #: Largest disc powers of the plan's maps, shared by its exposure assessments.
    maxima_cache: dict = field(default_factory=dict, repr=False)
    #: Assessments run later by :mod:`stimplan.plan.evaluate`, by name.
    evaluations: dict = field(default_factory=dict, repr=False)
    #: ``progress(stage, done, total)`` for the assessments run later, or None.
    progress: object = field(default=None, repr=False, compare=False)

    def close(self) -> None:
        """Remove the plan's spool folder (if it has one). The plan's spooled arrays
        cannot be read afterwards; closing twice is harmless."""
        cleanup = getattr(self.spool, "cleanup", None)
        if cleanup is not None:
            cleanup()

    def __enter__(self) -> Plan:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def seed(self) -> int:
        return int(self.spec.seed)

    @property
    def verdict(self) -> str:
        return "within" if self.exposure is None else self.exposure.verdict

    @property
    def duration_ms(self) -> float:
        if not self.frames:
            return 0.0
        last = self.frames[-1]
        return last.start_ms + last.duration_ms

    def mask_power_for(self, frame: FramePlan) -> float | None:
        """Laser power the amplitude mask needs for the frame's ON-pixel irradiance, mW.

        For a frame planned by target irradiance this is the mask's power for the
        same target; for a frame given in mW it is the power at which the mask
        gives the ON pixels what the hologram gives them.
        """
        sp = self.stimuli.get(frame.stimulus) if frame.stimulus else None
        if sp is None or sp.mask_figures is None or not frame.lit:
            return None
        h = sp.hologram_figures.on_irradiance_mw_per_mm2
        m = sp.mask_figures.on_irradiance_mw_per_mm2
        return None if m <= 0 else frame.power_mw * h / m
