"""The hologram jobs of a plan: each distinct stimulus designed once, translated copies reused."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace

import numpy as np

from ..budget import footprint_mw, light_budget, slm_fraction
from ..comparison import pixel_figures, project_mask_on_implant
from ..errors import ConfigError
from ..gain import gain_factors
from ..holography import Hologram, add_phase_ramp, design_hologram
from ..holography.design import display_levels
from ..holography.quantize import grey_map_for
from ..implant.target import implant_target, pixel_states
from ..metrics import pattern_metrics
from ..optics.target import Target
from ..reuse import (
    coarse_grid,
    envelope_change,
    family_key,
    proposed_translations,
    shift_in_samples,
    translation_between,
    verify_translation,
)
from ..tolerance import robust_implant_target
from .model import StimulusPlan
from .spool import (
    REFERENCE_POWER_MW,
)

__all__ = ["Job", "plan_jobs", "task_function"]


def _build_target(stim, spec, grid, design=None, *, name: str = "stimulus") -> Target:
    design = stim.render(grid) if design is None else design
    if spec.implant is not None and spec.implant_aware:
        tol = spec.tolerance
        try:
            if tol is not None and tol.robust_design:
                return robust_implant_target(
                    design,
                    grid,
                    spec.implant,
                    spec.system,
                    defocus_d=tol.design_defocus_d(spec.system.eye.focal_length_mm),
                    threshold=spec.on_threshold,
                )
            return implant_target(design, grid, spec.implant, threshold=spec.on_threshold)
        except ConfigError as exc:  # name the stimulus of the file, and the way out
            raise ConfigError(
                f"stimuli.{name}",
                exc.value,
                exc.allowed,
                "the implant-aware target lights ON pixels only: make the stimulus larger "
                "or brighter, or set hologram.implant_aware = false",
            ) from None
    return Target.from_intensity(design, grid, name="image-domain")


def _settings(spec):
    st = spec.ifta
    if spec.implant is not None and spec.implant_aware:
        st = replace(st, group_weighting=True)
    return st


def _design(
    stim,
    spec,
    system,
    progress,
    workers,
    initial_phase_rad=None,
    iterations=None,
    design=None,
    *,
    name: str = "stimulus",
):
    grid = system.design_grid()
    st = _settings(spec)
    if iterations is not None:
        st = replace(
            st, iterations=iterations, quantized_iterations=min(st.quantized_iterations, iterations)
        )
    target = _build_target(stim, spec, grid, design, name=name)
    return design_hologram(
        target,
        system,
        st,
        offset_um=spec.offset_um,
        initial_phase_rad=initial_phase_rad,
        progress=progress,
        workers=workers,
    )


def _translated(
    base: Hologram,
    stim,
    spec,
    system,
    shift_rc,
    base_name: str,
    design=None,
    *,
    stim_name="stimulus",
) -> Hologram:
    """The base hologram moved by ``shift_rc`` design samples with a linear phase ramp."""
    grid = system.design_grid()
    phase = add_phase_ramp(base.phase_rad, shift_rc[0], shift_rc[1])
    target = _build_target(stim, spec, grid, design, name=stim_name)
    rows, cols = base.offset_samples
    if rows or cols:
        target = target.shifted(rows, cols)
    levels = display_levels(phase, system)
    return replace(
        base,
        phase_rad=phase,
        levels=levels,
        grey=grey_map_for(system.slm).to_grey(levels),
        target=target,
        reused_from=base_name,
    )


def _evaluate(name, stim, index, spec, system, holo, workers, design=None) -> StimulusPlan:
    """Prediction, metrics, mask baseline and implant readout of one hologram (at 1 mW)."""
    t0 = time.perf_counter()
    grid = system.design_grid()
    design = stim.render(grid) if design is None else design
    lit = holo.target.region_on(system.prediction_grid(spec.oversample), "lit")
    pred = holo.predict(system, oversample=spec.oversample, workers=workers, signal_region=lit)
    t1 = time.perf_counter()
    metrics = pattern_metrics(pred, holo.target, lit=lit)
    del lit
    pg = pred.grid
    mp, mask = project_mask_on_implant(
        stim.render(pg),
        pg,
        spec.mask,
        spec.implant,
        REFERENCE_POWER_MW,
        system.eye.transmission,
    )
    on = hfig = mfig = readout = gain = None
    on_mw = off_mw = foot_mw = 0.0
    if spec.implant is not None:
        wl = system.illumination.wavelength_nm
        states = pixel_states(design, grid, spec.implant, threshold=spec.on_threshold)
        on = states.on
        readout = spec.implant.readout(pred.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
        cells = spec.implant.rasterize(pg, "cell", check_fit=False)
        foot_mw = footprint_mw(pred.irradiance_mw_per_mm2, pg.sample_area_mm2, cells)
        pd_mw = np.asarray(readout.power_uw, np.float64) * 1e-3
        on_mw, off_mw = float(pd_mw[states.on].sum()), float(pd_mw[~states.on].sum())
        mread = spec.implant.readout(mp.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
        if on.any():
            hfig = pixel_figures("hologram", readout, on)
            mfig = pixel_figures(f"{mask.kind.upper()} mask", mread, on)
            if hfig.on_power_uw > 0 and mfig.on_power_uw > 0:
                gain = gain_factors(
                    hologram_on_power_uw=np.asarray(readout.power_uw)[on],
                    mask_on_power_uw=np.asarray(mread.power_uw)[on],
                    on_active_area_mm2=np.asarray(readout.active_area_mm2)[on],
                    laser_power_mw=REFERENCE_POWER_MW,
                    mask_efficiency=mask.efficiency,
                    eye_transmission=system.eye.transmission,
                    field_area_mm2=mp.field_area_mm2,
                )
    t2 = time.perf_counter()
    acc = pred.account
    slm = system.slm
    budget = light_budget(
        acc,
        slm_fraction=slm_fraction(system),
        fill_factor=slm.fill_factor,
        zero_order_fraction=system.unmodulated_fraction,
        phase_levels=slm.phase_levels,
        eye_transmission=system.eye.transmission,
        retina_mw=acc.retina_mw,
        footprint_mw=foot_mw,
        on_photodiodes_mw=on_mw,
        off_photodiodes_mw=off_mw,
    )
    return StimulusPlan(
        name=name,
        hologram_index=index,
        target=holo.target,
        hologram=holo,
        prediction=pred,
        metrics=metrics,
        mask_prediction=mp,
        on=on,
        hologram_figures=hfig,
        mask_figures=mfig,
        readout=readout,
        gain=gain,
        budget=budget,
        timings_s={"predictions": t1 - t0, "readouts": t2 - t1},
    )


def _initial_from(base: Hologram, shift_rc) -> np.ndarray:
    """A warm start: the base's designed phase without its off-axis term, moved by ``shift_rc``."""
    rows, cols = base.offset_samples
    return add_phase_ramp(base.phase_rad, shift_rc[0] - rows, shift_rc[1] - cols)


@dataclass(frozen=True)
class Job:
    names: tuple[str, ...]
    kind: str  # "fresh", "translate" or "warm"
    base: int = -1
    shift_rc: tuple[float, float] = (0.0, 0.0)


def plan_jobs(
    spec,
    groups: list[list[str]],
    system,
    *,
    reuse: bool = True,
    envelope_tolerance: float = 0.05,
    neighbours: int = 8,
) -> list[Job]:
    """How each distinct stimulus is obtained: computed, translated from another, or warm-started.

    Stimuli that can differ only by a translation form a family
    (:func:`stimplan.reuse.family_key`). In the image domain a translated
    stimulus reuses a computed hologram of its family with a linear phase
    ramp. The pixel envelope does not move with the pattern, so a computed
    hologram can serve the family members whose envelope changes by at most
    ``envelope_tolerance`` over their pattern (over the implant, if there is
    one) when moved there; each member considers its ``neighbours`` nearest
    members (by translation) as sources. The computed holograms are chosen
    greedily, each the one that serves the most members not yet served, and
    each member takes the computed hologram whose envelope changes least; the prediction of a
    reused hologram is computed anew, so its figures are its own. With
    implant-aware targets a translation is not a translation of the target
    (the implant stays put), so the first computed member of the family is
    only the starting phase of the others (e.g. a reversed checkerboard starts
    from its partner), with half the iterations.

    Returns
    -------
    list of Job
        In the order of ``groups``; ``base`` indexes that list.
    """
    jobs = [Job(tuple(names), "fresh") for names in groups]
    if not reuse or len(groups) < 2:
        return jobs
    grid = system.design_grid()
    stims = [spec.stimuli[g[0]] for g in groups]
    renders: dict = {}
    families: dict[str, list[int]] = {}
    for i, st in enumerate(stims):
        families.setdefault(family_key(st), []).append(i)
    aware = spec.implant is not None and spec.implant_aware
    coarse = coarse_grid(grid)
    region = None
    if spec.implant is not None and not aware:
        region = spec.implant.rasterize(coarse, "cell", check_fit=False).coverage_image() > 0

    for members in families.values():
        if len(members) < 2:
            continue
        if aware:
            fresh = [members[0]]
            for j in members[1:]:
                for i in fresh:
                    t = translation_between(stims[i], stims[j], grid, renders=renders)
                    if t is not None:
                        jobs[j] = Job(jobs[j].names, "warm", i, shift_in_samples(t, grid))
                        break
                else:
                    fresh.append(j)
            continue
        # image domain: which computed hologram could serve which member, and how well
        serves: dict[int, dict[int, tuple[float, tuple[float, float]]]] = {i: {} for i in members}
        for j in members:
            if id(stims[j]) not in renders:
                renders[id(stims[j])] = stims[j].render(coarse)
            lit = renders[id(stims[j])] > 0
            if region is not None:
                lit &= region
            near = []
            for i in members:
                if i != j:
                    props = proposed_translations(stims[i], stims[j])
                    if props:
                        near.append((math.hypot(*props[0]), i, props[0]))
            for _, i, t in sorted(near)[:neighbours]:
                change = envelope_change(lit, shift_in_samples(t, coarse), system.slm.fill_factor)
                if change <= envelope_tolerance:
                    serves[i][j] = (change, t)
        waiting = set(members)
        chosen: list[int] = []
        while waiting:
            i = max(sorted(waiting), key=lambda k: len(waiting & serves[k].keys()))
            chosen.append(i)
            waiting.discard(i)
            for j in sorted(waiting & serves[i].keys()):
                if verify_translation(stims[i], stims[j], serves[i][j][1], grid, renders=renders):
                    waiting.discard(j)
                else:
                    del serves[i][j]
        for j in members:
            if j in chosen:
                continue
            for _, i, t in sorted(
                (serves[i][j][0], i, serves[i][j][1]) for i in chosen if j in serves[i]
            ):
                if verify_translation(stims[i], stims[j], t, grid, renders=renders):
                    jobs[j] = Job(jobs[j].names, "translate", i, shift_in_samples(t, grid))
                    break
    return jobs


def timed(sp: StimulusPlan, start: float) -> StimulusPlan:
    """``sp`` with the time of its hologram design (from ``start``, less its evaluation)."""
    total = time.perf_counter() - start
    spent = sum(sp.timings_s.values())
    sp.timings_s = {"holograms": max(total - spent, 0.0), **sp.timings_s}
    return sp


def task_function(job: Job, index: int, spec, system, tick, *, spool: str | None = None):
    stim = spec.stimuli[job.names[0]]
    name = job.names[0]
    evaluate = _evaluate
    if spool is not None:

        def evaluate(*args):
            return _evaluate(*args).spool_to(spool)

    if job.kind == "fresh":

        def run(*, workers):
            t = time.perf_counter()
            design = stim.render(system.design_grid())
            holo = _design(stim, spec, system, tick, workers, design=design, name=name)
            return timed(evaluate(name, stim, index, spec, system, holo, workers, design), t)

    elif job.kind == "translate":

        def run(base, *, workers):
            t = time.perf_counter()
            design = stim.render(system.design_grid())
            holo = _translated(
                base.hologram, stim, spec, system, job.shift_rc, base.name, design, stim_name=name
            )
            return timed(evaluate(name, stim, index, spec, system, holo, workers, design), t)

    else:

        def run(base, *, workers):
            t = time.perf_counter()
            init = _initial_from(base.hologram, job.shift_rc)
            its = max(10, spec.ifta.iterations // 2)
            design = stim.render(system.design_grid())
            holo = _design(stim, spec, system, tick, workers, init, its, design, name=name)
            return timed(evaluate(name, stim, index, spec, system, holo, workers, design), t)

    return run
