"""Assessments of a finished plan that are run only when asked for.

A :class:`~stimplan.plan.model.Plan` holds the hologram sequence's own
assessment. The others cost as much again each, so they are explicit calls:

* :func:`mask_exposure` - the timeline through the amplitude mask at the same
  laser powers, or (``equal_irradiance=True``) at the powers that give the ON
  pixels the holograms' irradiance;
* :func:`stimulus_exposures` - each hologram's frames on their own;
* :func:`stimulus_tolerances` - each hologram's per-pixel powers over the
  ``[tolerance]`` ranges (a prediction per focusing error).

Each result is kept in the plan's ``evaluations`` and shared by later calls
(the summary, the report, the export and the plugin ask for the same ones).
"""

from __future__ import annotations

from dataclasses import replace

from ..errors import ConfigError
from ..exposure import ExposureAssessment
from ..tolerance import ToleranceResult, analyse_tolerance
from .progress import stage_ticker
from .spool import REFERENCE_POWER_MW
from .wiring import assess_frames

__all__ = ["mask_exposure", "stimulus_exposures", "stimulus_tolerances", "max_laser_power_mw"]


def _assess(plan, stage: str, frames, which: str, power_of=None):
    wl = plan.spec.system.illumination.wavelength_nm
    try:
        return assess_frames(
            frames,
            plan.stimuli,
            which,
            wl,
            plan.spec,
            power_of=power_of,
            cache=plan.maxima_cache,
            progress=stage_ticker(plan.progress, stage),
        )
    finally:
        close = getattr(plan.progress, "close", None)
        if close is not None:
            close()


def _kept(plan, key, compute):
    if key not in plan.evaluations:
        plan.evaluations[key] = compute()
    return plan.evaluations[key]


def mask_exposure(plan, *, equal_irradiance: bool = False) -> ExposureAssessment | None:
    """The plan's timeline through the amplitude mask.

    Parameters
    ----------
    plan : Plan
    equal_irradiance : bool
        False: at the holograms' laser powers. True: at the powers that give the
        ON pixels the same irradiance as the holograms
        (:meth:`~stimplan.plan.model.Plan.mask_power_for`); None without an
        implant.
    """
    if not equal_irradiance:
        return _kept(plan, "mask", lambda: _assess(plan, "mask exposure", plan.frames, "mask"))
    if plan.spec.implant is None:
        return None
    return _kept(
        plan,
        "mask_equal_irradiance",
        lambda: _assess(
            plan, "mask exposure, equal irradiance", plan.frames, "mask", plan.mask_power_for
        ),
    )


def stimulus_exposures(plan) -> dict[int, ExposureAssessment]:
    """Exposure of each hologram's frames on their own, by hologram index."""

    def compute():
        if len(plan.holograms) == 1:
            only = plan.holograms[0].hologram_index
            return {} if plan.exposure is None else {only: plan.exposure}
        out = {}
        for sp in plan.holograms:
            own = [f for f in plan.frames if f.hologram_index == sp.hologram_index]
            a = _assess(plan, f"exposure of {sp.name}", own, "hologram")
            if a is not None:
                out[sp.hologram_index] = a
        return out

    return _kept(plan, "stimuli", compute)


def stimulus_tolerances(plan) -> dict[int, ToleranceResult]:
    """Tolerance analysis of each hologram at 1 mW of laser power, by hologram index
    (:func:`stimplan.tolerance.analyse_tolerance` over the sequence's ``[tolerance]``
    ranges); empty without ranges, an implant or ON pixels."""

    def compute():
        spec = plan.spec
        if spec.tolerance is None or spec.implant is None:
            return {}
        # at the plan's reference power, as every per-hologram figure of the plan
        ill = replace(spec.system.illumination, power_mw=REFERENCE_POWER_MW)
        system = replace(spec.system, illumination=ill)
        out = {}
        tick = stage_ticker(plan.progress, "tolerance")
        try:
            for sp in plan.holograms:
                if sp.on is None or not sp.on.any():
                    continue
                out[sp.hologram_index] = analyse_tolerance(
                    sp.hologram,
                    system,
                    spec.implant,
                    sp.on,
                    ranges=spec.tolerance,
                    oversample=spec.oversample,
                    progress=tick,
                )
        finally:
            close = getattr(plan.progress, "close", None)
            if close is not None:
                close()
        return out

    return _kept(plan, "tolerance", compute)


def max_laser_power_mw(plan, which: str = "hologram") -> float:
    """Largest peak frame power (mW) when every frame's power is scaled alike and every
    rule, and the protocol cap, stays within its limit.

    Parameters
    ----------
    plan : Plan
    which : {"hologram", "mask"}
        The holograms, or the amplitude mask shown at the same powers.
    """
    if which not in ("hologram", "mask"):
        raise ConfigError("which", which, "'hologram' or 'mask'")
    a = plan.exposure if which == "hologram" else mask_exposure(plan)
    if a is None:
        return float("inf")
    worst = max(a.worst_ratio, 0.0)
    if a.protocol is not None:
        worst = max(worst, a.protocol.worst_ratio)
    peak = max((f.power_mw for f in plan.frames if f.lit), default=0.0)
    return float("inf") if worst == 0 else peak / worst
