"""What the stimulus panel computes, without Qt.

The panel's inputs become a :class:`StimulusRequest`; :func:`compute_stimulus`
turns it into a one-step sequence on the chosen optics and plans it with
:func:`stimplan.plan.plan_sequence`, so the panel shows exactly the
figures the command line and the report would.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from stimplan import validate
from stimplan.errors import ConfigError
from stimplan.holography import IftaSettings
from stimplan.implant import implant_preset
from stimplan.plan import REFERENCE_POWER_MW, plan_sequence
from stimplan.plan.memory import check_memory
from stimplan.scenarios import SCENARIOS, load_scenario, with_slm_pixels
from stimplan.sequence import StepSpec, TimingSpec, load_sequence
from stimplan.sequence.model import truncation_error
from stimplan.stimuli import (
    E_ORIENTATIONS,
    LANDOLT_ORIENTATIONS,
    SLOAN_LETTERS,
    Optotype,
    stimulus_from_dict,
)
from stimplan.stimuli.base import STIMULUS_KINDS
from stimplan.tolerance import ToleranceRanges

__all__ = [
    "OPTICS_PRESETS",
    "SOURCE_IMPLANT",
    "NO_IMPLANT",
    "PANEL_KINDS",
    "StimulusRequest",
    "StimulusResult",
    "load_optics",
    "stimulus_fields",
    "compute_stimulus",
]

#: Optics presets of the panel: the systems of the demo scenarios (our own numbers).
OPTICS_PRESETS: Mapping[str, str] = SCENARIOS
#: Implant choice: the one of the optics source.
SOURCE_IMPLANT = "as in optics"
#: Implant choice: no implant.
NO_IMPLANT = "none"
#: Stimulus kinds the panel offers (the compositions and the blank need a sequence file).
PANEL_KINDS = (
    "grating",
    "checkerboard",
    "landolt",
    "tumbling_e",
    "letter",
    "spot",
    "bar",
    "annulus",
    "flash",
    "image",
)
#: Starting values of required stimulus sizes, µm (any value the user then edits).
#: How the panel sizes an optotype: its height in µm, or its logMAR through the eye.
SIZE_BY = ("height (µm)", "logMAR")

_REQUIRED_DEFAULTS: Mapping[str, Any] = {
    "period_um": 220.0,
    "check_um": 110.0,
    "height_um": 400.0,
    "diameter_um": 300.0,
    "width_um": 100.0,
    "length_um": 600.0,
    "inner_diameter_um": 200.0,
    "outer_diameter_um": 500.0,
    "path": "",
    ("image", "width_um"): 600.0,
}


def load_optics(source: str):
    """The sequence whose optics, eye and implant the panel uses.

    Parameters
    ----------
    source : str
        A key of :data:`OPTICS_PRESETS` or the path of a sequence file.

    Returns
    -------
    SequenceSpec

    Raises
    ------
    SequenceError
        If the file is not a valid sequence.
    """

    if source in OPTICS_PRESETS:
        return load_scenario(source)
    return load_sequence(Path(source))


def stimulus_fields(kind: str) -> list[tuple[str, Any, Any, tuple | None]]:
    """Editable parameters of a stimulus kind: ``(name, type, starting value, choices)``.

    Sizes are in µm (the names say so), angles in degrees; ``choices`` lists
    the allowed values of a parameter that takes one of a few names.
    """
    import typing

    named = {
        ("landolt", "orientation"): tuple(LANDOLT_ORIENTATIONS),
        ("tumbling_e", "orientation"): tuple(E_ORIENTATIONS),
        ("letter", "letter"): tuple(SLOAN_LETTERS),
    }
    cls = STIMULUS_KINDS[kind]
    hints = typing.get_type_hints(cls)
    out = []
    for f in dataclasses.fields(cls):
        if f.name == "max_pixels":
            continue
        hint = hints.get(f.name, float)
        choices = named.get((kind, f.name))
        if typing.get_origin(hint) is typing.Literal:
            choices, hint = tuple(typing.get_args(hint)), str
        if f.default is not dataclasses.MISSING:
            start = f.default
        else:
            start = _REQUIRED_DEFAULTS.get((kind, f.name), _REQUIRED_DEFAULTS.get(f.name, 1.0))
        out.append((f.name, hint, start, choices))
    if issubclass(cls, Optotype):
        # an optotype's size by its height or by logMAR (through the optics' eye)
        out.append(("size_by", str, SIZE_BY[0], SIZE_BY))
        out.append(("logmar", float, 1.0, None))
    return out


@dataclass(frozen=True)
class StimulusRequest:
    """The inputs of the stimulus panel.

    Parameters
    ----------
    optics : str
        A key of :data:`OPTICS_PRESETS` or a sequence file.
    kind : str
        Stimulus kind, one of :data:`PANEL_KINDS`.
    params : dict
        The kind's parameters (sizes in µm).
    implant : str
        :data:`SOURCE_IMPLANT`, :data:`NO_IMPLANT` or an implant preset.
    implant_aware : bool
        Light only the ON pixels' photodiodes (ignored without an implant).
    method : str
        IFTA method.
    iterations : int
    seed : int
    slm_pixels : int
        SLM pixels per side, 0 for the optics' own SLM.
    power_mw : float or None
        Laser power on the SLM; ``None`` for the optics' own (or for the
        power that gives ``irradiance_mw_per_mm2``).
    irradiance_mw_per_mm2 : float or None
        Instead of a laser power: the mean irradiance on the ON pixels'
        photodiodes the laser power is set to (needs an implant).
    pulse_ms, rate_hz, train_ms : float
        The pulse train the exposure estimate assumes.
    defocus_d : float
        Tolerance analysis over ±this defocus of the eye, dioptres (0: none).
    shift_um : float
        Tolerance analysis over lateral shifts of the image up to this, µm (0: none).
    robust_design : bool
        Design the implant-aware hologram to keep its ON power over the defocus
        (:func:`stimplan.tolerance.robust_implant_target`).
    """

    optics: str
    kind: str
    params: dict[str, Any] = field(default_factory=dict)
    implant: str = SOURCE_IMPLANT
    implant_aware: bool = True
    method: str = "mraf"
    iterations: int = 40
    seed: int = 0
    slm_pixels: int = 0
    power_mw: float | None = None
    irradiance_mw_per_mm2: float | None = None
    pulse_ms: float = 10.0
    rate_hz: float = 20.0
    train_ms: float = 1000.0
    defocus_d: float = 0.0
    shift_um: float = 0.0
    robust_design: bool = False


@dataclass(frozen=True, eq=False)
class StimulusResult:
    """One computed stimulus at the requested laser power.

    Attributes
    ----------
    request : StimulusRequest
    plan : Plan
        The one-step plan (predictions at 1 mW, exposure at ``power_mw``).
    power_mw : float
        Laser power on the SLM.
    prediction : RetinalPrediction
        Retina at ``power_mw``.
    pixel_power_uw : ndarray or None
        Power on each photodiode at ``power_mw``, µW.
    """

    request: StimulusRequest
    plan: Any
    power_mw: float
    prediction: Any
    pixel_power_uw: np.ndarray | None

    @property
    def stimulus_plan(self):
        return self.plan.holograms[0]

    @property
    def system(self):
        return replace(
            self.plan.spec.system,
            illumination=replace(self.plan.spec.system.illumination, power_mw=self.power_mw),
        )

    @property
    def hologram(self):
        return self.stimulus_plan.hologram

    @property
    def implant(self):
        return self.plan.spec.implant

    @property
    def on(self):
        return self.stimulus_plan.on

    @property
    def readout(self):
        return self.stimulus_plan.readout


def _one_step_spec(request: StimulusRequest):

    base = load_optics(request.optics)
    validate.choice("stimulus.kind", request.kind, PANEL_KINDS)
    system = with_slm_pixels(base.system, request.slm_pixels)
    power = base.system.illumination.power_mw if request.power_mw is None else request.power_mw
    power = validate.number("laser power_mw", power, lo=0, lo_open=True)
    system = replace(system, illumination=replace(system.illumination, power_mw=power))
    if request.implant == SOURCE_IMPLANT:
        implant = base.implant
    elif request.implant == NO_IMPLANT:
        implant = None
    else:
        implant = implant_preset(request.implant)
    aware = bool(request.implant_aware) and implant is not None
    pitch = None if implant is None else implant.pitch_um
    params = dict(request.params)
    size_by = params.pop("size_by", SIZE_BY[0])
    logmar = params.pop("logmar", None)
    if size_by == "logMAR":
        params.pop("height_um", None)
        params["logmar"] = logmar
    if request.kind == "image" and not str(params.get("path") or "").strip():
        raise ConfigError("image.path", params.get("path"), "an image file (PNG, TIFF, ...)")
    stim = stimulus_from_dict(request.kind, params, eye=system.eye, pitch_um=pitch)
    ifta = IftaSettings(
        method=request.method,
        iterations=request.iterations,
        seed=request.seed,
        mraf_mix=base.ifta.mraf_mix,
        window_margin_samples=base.ifta.window_margin_samples,
        quantized_iterations=min(base.ifta.quantized_iterations, request.iterations),
        initial=base.ifta.initial,
        group_weighting=aware,
        group_gain=base.ifta.group_gain,
    )
    target = request.irradiance_mw_per_mm2
    if target is not None and implant is None:
        raise ConfigError(
            "power by",
            "ON-pixel irradiance",
            "an implant (the irradiance is read on its ON pixels)",
            "choose an implant, or set the laser power",
        )
    step = StepSpec(
        (request.kind,),
        duration_ms=request.train_ms,
        pulse_ms=request.pulse_ms,
        rate_hz=request.rate_hz,
        power_mw=None if target is not None else power,
        irradiance_mw_per_mm2=target,
    )
    cut = truncation_error("", step, field="train length (ms)", remedy="")
    if cut is not None:  # the panel's train must end on a whole pulse
        raise cut
    tolerance = None
    if request.defocus_d or request.shift_um or request.robust_design:
        tolerance = ToleranceRanges(
            defocus_d=request.defocus_d,
            shift_um=request.shift_um,
            robust_design=request.robust_design,
        )
    return replace(
        base,
        title=f"{request.kind} on {request.optics}",
        tolerance=tolerance,
        seed=request.seed,
        system=system,
        implant=implant,
        implant_aware=aware,
        stimuli={request.kind: stim},
        steps=(step,),
        ifta=ifta,
        shuffle=False,
        interleave=False,
        repeats=1,
        timing=TimingSpec(),  # one train from time 0: no jitter, one hologram
        raw={},
    ), power


def compute_stimulus(
    request: StimulusRequest,
    progress: Callable[[int, int], None] | None = None,
) -> StimulusResult:
    """Design, predict and assess one stimulus.

    Parameters
    ----------
    request : StimulusRequest
    progress : callable, optional
        Called as ``progress(done, total)`` with IFTA iterations.

    Returns
    -------
    StimulusResult

    Raises
    ------
    StimplanError
        For bad input (the message names the field, the value and what is allowed).
    """

    spec, power = _one_step_spec(request)
    cb = None
    if progress is not None:

        def cb(stage: str, done: int, total: int) -> None:
            if stage == "holograms":  # the exposure stages have no known total
                progress(done, total)

    check_memory(spec)
    plan = plan_sequence(spec, progress=cb or False)
    if not plan.holograms:
        raise ConfigError("stimulus", request.kind, "a stimulus that lights something")
    sp = plan.holograms[0]
    if request.irradiance_mw_per_mm2 is not None:  # the power that meets the target
        power = next(f.power_mw for f in plan.frames if f.lit)
    k = power / REFERENCE_POWER_MW
    pred = sp.prediction.scaled_to(power)
    pixel = None if sp.readout is None else np.asarray(sp.readout.power_uw) * k
    return StimulusResult(request, plan, power, pred, pixel)
