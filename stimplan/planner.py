"""From a sequence to a plan: holograms, predictions, readouts, baseline and exposure.

Each distinct stimulus is computed once. Everything downstream of the laser
is linear in the laser power, so a stimulus is predicted once at 1 mW and
every frame scales that prediction to its own power.

References
----------
.. [1] ICNIRP, "Guidelines on limits of exposure to laser radiation of
   wavelengths between 180 nm and 1,000 µm", *Health Phys.* 105, 271 (2013).
"""

from __future__ import annotations

import copy
import json
import math
import os
import pickle
import sys
import tempfile
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from . import exposure as xp
from .cautions import CAUTIONS
from .comparison import ProjectorFigures, pixel_figures, project_mask_on_implant
from .errors import ConfigError
from .grid import RetinalGrid
from .holography import Hologram, add_phase_ramp, design_hologram
from .holography.design import display_levels
from .holography.propagation import with_higher_orders
from .holography.quantize import grey_map_for
from .implant_target import implant_target, pixel_states
from .metrics import PatternMetrics, pattern_metrics
from .target import Target

__all__ = ["StimulusPlan", "FramePlan", "Plan", "plan_sequence", "stimulus_key"]

REFERENCE_POWER_MW = 1.0
#: Above this estimate of the per-hologram arrays, ``store="auto"`` spools them to disk.
MEMORY_BUDGET_MB = 1024.0
#: Bytes per SLM pixel that one hologram's parts take in memory (phase, levels, grey,
#: target and regions on the design grid; prediction and mask maps on the 2x grid).
BYTES_PER_SLM_PIXEL = 48


def stimulus_key(stimulus) -> str:
    """A canonical text of a stimulus's parameters: equal keys, equal holograms."""
    return json.dumps(stimulus.to_dict(), sort_keys=True, default=str)


class Spooled:
    """A large result kept in a file of the plan's spool folder, loaded on use."""

    __slots__ = ("path",)

    def __init__(self, path: str) -> None:
        self.path = path

    @classmethod
    def write(cls, obj, folder: str, name: str) -> Spooled:
        path = os.path.join(folder, name)
        with open(path, "wb") as fh:
            pickle.dump(obj, fh, protocol=pickle.HIGHEST_PROTOCOL)
        return cls(path)

    def load(self):
        # the file was written by this process's plan into its own temporary folder
        with open(self.path, "rb") as fh:
            return pickle.load(fh)


def _part(value):
    return value.load() if isinstance(value, Spooled) else value


_LARGE = ("target", "hologram", "prediction", "mask_prediction")


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

    target = property(lambda self: _part(self._parts["target"]), doc="The Target.")
    hologram = property(lambda self: _part(self._parts["hologram"]), doc="The Hologram.")
    prediction = property(
        lambda self: _part(self._parts["prediction"]), doc="RetinalPrediction at 1 mW."
    )
    mask_prediction = property(
        lambda self: _part(self._parts["mask_prediction"]), doc="MaskPrediction at 1 mW."
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
                else Spooled.write(v, folder, f"{self.hologram_index:05d}-{k}.pkl")
            )
            for k, v in self._parts.items()
        }
        return out

    def on_irradiance_per_mw(self, basis: str = "mean") -> float:
        """ON-pixel retinal irradiance per mW of laser power ("mean" or "min")."""
        if self.readout is None or self.on is None:
            raise ConfigError("irradiance_mw_per_mm2", None, "an implant to define ON pixels")
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
    mask_exposure : ExposureAssessment or None
        The same timeline through the amplitude mask at the same powers;
        computed on first use.
    stimulus_exposure : dict of int to ExposureAssessment
        Each hologram's frames alone (by hologram index); computed on first use.
    """

    spec: object
    stimuli: dict[str, StimulusPlan]
    holograms: tuple[StimulusPlan, ...]
    frames: tuple[FramePlan, ...]
    exposure: xp.ExposureAssessment | None
    cautions: str = CAUTIONS
    spool: object = field(default=None, repr=False)
    timings_s: dict = field(default_factory=dict)
    #: Largest disc powers of the plan's maps, shared by its exposure assessments.
    maxima_cache: dict = field(default_factory=dict, repr=False)

    @cached_property
    def mask_exposure(self) -> xp.ExposureAssessment | None:
        """The timeline through the amplitude mask at the same laser powers."""
        wl = self.spec.system.illumination.wavelength_nm
        return _assess(self.frames, self.stimuli, "mask", wl, self.spec, cache=self.maxima_cache)

    @cached_property
    def mask_exposure_equal_irradiance(self) -> xp.ExposureAssessment | None:
        """The timeline through the amplitude mask at the laser powers that give the ON
        pixels the same irradiance as the holograms (:meth:`mask_power_for`); None
        without an implant."""
        if self.spec.implant is None:
            return None
        wl = self.spec.system.illumination.wavelength_nm
        return _assess(
            self.frames,
            self.stimuli,
            "mask",
            wl,
            self.spec,
            power_of=self.mask_power_for,
            cache=self.maxima_cache,
        )

    @cached_property
    def stimulus_exposure(self) -> dict[int, xp.ExposureAssessment]:
        """Exposure of each hologram's frames on their own, by hologram index."""
        if len(self.holograms) == 1:
            only = self.holograms[0].hologram_index
            return {} if self.exposure is None else {only: self.exposure}
        wl = self.spec.system.illumination.wavelength_nm
        out = {}
        for sp in self.holograms:
            own = [f for f in self.frames if f.hologram_index == sp.hologram_index]
            a = _assess(own, self.stimuli, "hologram", wl, self.spec, cache=self.maxima_cache)
            if a is not None:
                out[sp.hologram_index] = a
        return out

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

    def frames_of(self, name: str) -> list[FramePlan]:
        return [f for f in self.frames if f.stimulus == name]

    def max_laser_power_mw(self, which: str = "hologram") -> float:
        """Largest peak frame power (mW) when every frame's power is scaled alike and every
        rule, and the protocol cap, stays within its limit.

        Parameters
        ----------
        which : {"hologram", "mask"}
            The holograms, or the amplitude mask shown at the same powers.
        """
        a = self.exposure if which == "hologram" else self.mask_exposure
        if a is None:
            return float("inf")
        worst = max(a.worst_ratio, 0.0)
        if a.protocol is not None:
            worst = max(worst, a.protocol.worst_ratio)
        peak = max((f.power_mw for f in self.frames if f.lit), default=0.0)
        return float("inf") if worst == 0 else peak / worst

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


def _build_target(stim, spec, grid, design=None) -> Target:
    design = stim.render(grid) if design is None else design
    if spec.implant is not None and spec.implant_aware:
        return implant_target(design, grid, spec.implant, threshold=spec.on_threshold)
    return Target.from_intensity(design, grid, name="image-domain")


def _settings(spec):
    st = spec.ifta
    if spec.implant is not None and spec.implant_aware:
        st = replace(st, group_weighting=True)
    return st


def _design(
    stim, spec, system, progress, workers, initial_phase_rad=None, iterations=None, design=None
):
    grid = system.design_grid()
    st = _settings(spec)
    if iterations is not None:
        st = replace(
            st, iterations=iterations, quantized_iterations=min(st.quantized_iterations, iterations)
        )
    target = _build_target(stim, spec, grid, design)
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
    base: Hologram, stim, spec, system, shift_rc, base_name: str, design=None
) -> Hologram:
    """The base hologram moved by ``shift_rc`` design samples with a linear phase ramp."""
    grid = system.design_grid()
    phase = add_phase_ramp(base.phase_rad, shift_rc[0], shift_rc[1])
    target = _build_target(stim, spec, grid, design)
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
    grid = system.design_grid()
    design = stim.render(grid) if design is None else design
    lit = holo.target.region_on(system.prediction_grid(spec.oversample), "lit")
    pred = holo.predict(system, oversample=spec.oversample, workers=workers, signal_region=lit)
    metrics = pattern_metrics(pred, holo.target, lit)
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
    on = hfig = mfig = readout = None
    if spec.implant is not None:
        wl = system.illumination.wavelength_nm
        states = pixel_states(design, grid, spec.implant, threshold=spec.on_threshold)
        on = states.on
        readout = spec.implant.readout(pred.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
        mread = spec.implant.readout(mp.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
        if on.any():
            hfig = pixel_figures("hologram", readout, on)
            mfig = pixel_figures(f"{mask.kind.upper()} mask", mread, on)
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
    )


def _initial_from(base: Hologram, shift_rc) -> np.ndarray:
    """A warm start: the base's designed phase without its off-axis term, moved by ``shift_rc``."""
    rows, cols = base.offset_samples
    return add_phase_ramp(base.phase_rad, shift_rc[0] - rows, shift_rc[1] - cols)


@dataclass(frozen=True)
class _Job:
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
) -> list[_Job]:
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
    list of _Job
        In the order of ``groups``; ``base`` indexes that list.
    """
    from .reuse import (
        coarse_grid,
        envelope_change,
        family_key,
        proposed_translations,
        shift_in_samples,
        translation_between,
        verify_translation,
    )

    jobs = [_Job(tuple(names), "fresh") for names in groups]
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
                        jobs[j] = _Job(jobs[j].names, "warm", i, shift_in_samples(t, grid))
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
                    jobs[j] = _Job(jobs[j].names, "translate", i, shift_in_samples(t, grid))
                    break
    return jobs


def _task_fn(job: _Job, index: int, spec, system, tick, spool: str | None = None):
    stim = spec.stimuli[job.names[0]]
    name = job.names[0]
    evaluate = _evaluate
    if spool is not None:

        def evaluate(*args):
            return _evaluate(*args).spool_to(spool)

    if job.kind == "fresh":

        def run(*, workers):
            design = stim.render(system.design_grid())
            holo = _design(stim, spec, system, tick, workers, design=design)
            return evaluate(name, stim, index, spec, system, holo, workers, design)

    elif job.kind == "translate":

        def run(base, *, workers):
            design = stim.render(system.design_grid())
            holo = _translated(base.hologram, stim, spec, system, job.shift_rc, base.name, design)
            return evaluate(name, stim, index, spec, system, holo, workers, design)

    else:

        def run(base, *, workers):
            init = _initial_from(base.hologram, job.shift_rc)
            its = max(10, spec.ifta.iterations // 2)
            design = stim.render(system.design_grid())
            holo = _design(stim, spec, system, tick, workers, init, its, design)
            return evaluate(name, stim, index, spec, system, holo, workers, design)

    return run


def plan_sequence(
    spec,
    *,
    progress: bool | Callable[[str, int, int], None] = True,
    reuse: bool = True,
    scheduler=None,
    store: str = "auto",
) -> Plan:
    """Plan a sequence: holograms, predictions, readouts, the mask baseline and exposure.

    Parameters
    ----------
    spec : SequenceSpec
        From :func:`stimplan.sequence.load_sequence`.
    progress : bool or callable
        ``True``: a tqdm bar on stderr; ``False``: silent; a callable is
        called as ``progress(stage, done, total)``.
    reuse : bool
        Reuse holograms of translated stimuli (see :func:`plan_jobs`).
    scheduler : None, str or distributed.Client
        Where the distinct holograms are computed (:func:`stimplan.batch.run_batch`):
        local threads by default, ``"serial"``, or a ``dask.distributed``
        scheduler address.
    store : {"auto", "memory", "disk"}
        Where the large per-hologram arrays live: in memory, or in a spool
        folder of the plan (read back on use), so that a long sequence of
        distinct holograms needs the memory of a few. ``"auto"`` chooses disk
        when the holograms would take more than :data:`MEMORY_BUDGET_MB`.

    Returns
    -------
    Plan
    """
    from .batch import Task, parallel_workers, run_batch
    from .sequence import expand_timeline

    frames_spec = expand_timeline(spec)
    system = replace(
        spec.system, illumination=replace(spec.system.illumination, power_mw=REFERENCE_POWER_MW)
    )
    needed: list[str] = []
    for fr in frames_spec:
        if fr.stimulus is not None and fr.stimulus not in needed:
            if spec.stimuli[fr.stimulus].kind != "blank":
                needed.append(fr.stimulus)
    by_key: dict[str, list[str]] = {}
    for name in needed:
        by_key.setdefault(stimulus_key(spec.stimuli[name]), []).append(name)
    groups = list(by_key.values())
    jobs = plan_jobs(spec, groups, system, reuse=reuse)
    iters = spec.ifta.iterations
    warm_iters = max(10, iters // 2)
    total = sum({"fresh": iters, "warm": warm_iters}.get(j.kind, 0) for j in jobs) + len(jobs)
    bar = None
    cb = progress if callable(progress) else None
    if progress is True:
        from tqdm import tqdm

        bar = tqdm(
            total=total,
            desc="holograms",
            unit="step",
            file=sys.stderr,
            leave=False,
            disable=None,
        )
    done = [0]
    lock = threading.Lock()

    def tick(_i=None):
        with lock:
            done[0] += 1
            if bar is not None:
                bar.update(1)
            if cb is not None:
                cb("holograms", done[0], total)

    local = scheduler is None or scheduler in ("serial", "threads", "sync")
    it_tick = tick if local else None  # progress cannot travel to remote workers
    if store not in ("auto", "memory", "disk"):
        raise ConfigError("store", store, "one of 'auto', 'memory', 'disk'")
    n_slm = system.slm.pixels_x * system.slm.pixels_y
    per_hologram_mb = n_slm * BYTES_PER_SLM_PIXEL * spec.oversample**2 / 4 / 2**20
    if store == "auto":
        store = "disk" if len(jobs) * per_hologram_mb > MEMORY_BUDGET_MB else "memory"
    spool_dir = tempfile.TemporaryDirectory(prefix="stimplan-spool-") if store == "disk" else None
    spool = None if spool_dir is None else spool_dir.name
    # the batch runs the computed holograms before those that start from them
    order = [i for i, j in enumerate(jobs) if j.base < 0] + [
        i for i, j in enumerate(jobs) if j.base >= 0
    ]
    position = {i: n for n, i in enumerate(order)}
    # With reused holograms on local threads, each computed hologram past the first
    # `lanes` starts after the one `lanes` before it: otherwise the threads would
    # first drain the translated frames of the first ones and start it late.
    lanes = parallel_workers()
    n_bases = sum(1 for j in jobs if j.base < 0)
    chained = n_bases < len(jobs)
    tasks = [
        Task(
            _task_fn(jobs[i], i, spec, system, it_tick, spool),
            (position[jobs[i].base],) if jobs[i].base >= 0 else (),
            jobs[i].kind,
            (n - lanes,) if chained and lanes <= n < n_bases else (),
        )
        for n, i in enumerate(order)
    ]
    t_start = time.perf_counter()
    try:
        batch = run_batch(tasks, scheduler=scheduler, on_done=tick)
    finally:
        if bar is not None:
            bar.close()
    results = [batch[position[i]] for i in range(len(jobs))]
    plans: dict[str, StimulusPlan] = {}
    for job, sp in zip(jobs, results, strict=True):
        for n in job.names:
            plans[n] = sp
    ordered = list(results)
    t_holograms = time.perf_counter() - t_start
    frames = tuple(_resolve_frame(fr, spec, plans) for fr in frames_spec)
    wl = spec.system.illumination.wavelength_nm
    cache: dict = {}
    exposure = _with_orders_note(_assess(frames, plans, "hologram", wl, spec, cache=cache), ordered)
    timings = {"holograms": t_holograms, "exposure": time.perf_counter() - t_start - t_holograms}
    return Plan(
        spec,
        plans,
        tuple(ordered),
        frames,
        exposure,
        spool=spool_dir,
        timings_s=timings,
        maxima_cache=cache,
    )


def _resolve_frame(fr, spec, plans) -> FramePlan:
    name = fr.stimulus
    if name is not None and spec.stimuli[name].kind == "blank":
        name_plan = None
    else:
        name_plan = plans.get(name) if name is not None else None
    if name_plan is None:
        return FramePlan(
            fr.index,
            fr.start_ms,
            fr.duration_ms,
            fr.pulse_ms or 0.0,
            fr.rate_hz or 0.0,
            0.0,
            name,
            -1,
            (),
        )
    if fr.irradiance_mw_per_mm2 is not None:
        per_mw = name_plan.on_irradiance_per_mw(fr.irradiance_basis or "mean")
        if per_mw <= 0:
            raise ConfigError(
                f"steps[{fr.step_index}].irradiance_mw_per_mm2",
                fr.irradiance_mw_per_mm2,
                "a stimulus that lights at least one implant pixel",
            )
        power = fr.irradiance_mw_per_mm2 / per_mw
    elif fr.power_mw is not None:
        power = float(fr.power_mw)
    else:
        power = float(spec.system.illumination.power_mw)
    on_uw = mask_uw = None
    if name_plan.hologram_figures is not None:
        on_uw = name_plan.hologram_figures.on_power_uw * power
        mask_uw = name_plan.mask_figures.on_power_uw * power
    return FramePlan(
        index=fr.index,
        start_ms=fr.start_ms,
        duration_ms=fr.duration_ms,
        pulse_ms=fr.pulse_ms,
        rate_hz=fr.rate_hz,
        power_mw=power,
        stimulus=name,
        hologram_index=name_plan.hologram_index,
        pulses=tuple(fr.pulses()),
        target_irradiance_mw_per_mm2=fr.irradiance_mw_per_mm2,
        on_pixel_power_uw=on_uw,
        mask_on_pixel_power_uw=mask_uw,
    )


def _assess(frames, plans, which: str, wavelength_nm: float, spec, power_of=None, cache=None):
    """Exposure of the timeline.

    Each hologram is one (lazily read) map at 1 mW; every pulse carries its
    frame's laser power (or ``power_of(frame)``) as its scale, so frames of one
    hologram at any powers share one map and the maps are read one at a time.
    """
    pulses_of: dict[int, list] = {}
    by_index = {p.hologram_index: p for p in plans.values()}
    for fr in frames:
        if not fr.lit or not fr.pulses:
            continue
        power = fr.power_mw if power_of is None else power_of(fr)
        if power is None:
            continue
        k = np.float64(power / REFERENCE_POWER_MW)
        pulses_of.setdefault(fr.hologram_index, []).extend(
            replace(p, scale=p.scale * float(k)) for p in fr.pulses
        )
    if not pulses_of:
        return None
    xframes = []
    margin = 0
    for hi, pulses in pulses_of.items():
        sp = by_index[hi]
        grid = sp.grid
        if which == "hologram":
            margin = _orders_margin(grid)
            grid = RetinalGrid(
                (grid.rows + 2 * margin, grid.cols + 2 * margin), grid.pitch_x_um, grid.pitch_y_um
            )

        def load(sp=sp, margin=margin):
            if which == "mask":
                return sp.mask_prediction.irradiance_mw_per_mm2
            pred = sp.prediction
            return with_higher_orders(
                pred.irradiance_mw_per_mm2, pred.grid, spec.system.slm.fill_factor, margin
            )[0]

        xframes.append(
            xp.Frame(
                load, tuple(sorted(pulses, key=lambda p: p.start_ms)), sp.name, key=f"{which}-{hi}"
            )
        )
    # the limits go to the retina with the transmission the prediction used, so it cancels
    eye = xp.EyeModel(
        transmission=spec.system.eye.transmission,
        source="f = 17 mm; τ = the planned eye's transmission, as in the prediction",
    )
    return xp.assess_sequence(
        xframes,
        grid,
        wavelength_nm,
        eye=eye,
        protocol=spec.protocol,
        subject=spec.system.eye.name,
        maxima_cache=cache,
    )


def _orders_margin(grid) -> int:
    """Samples of neighbouring diffraction orders to add around a map for the exposure.

    The largest acceptance disc (alpha = 100 mrad through the reference eye) centred
    anywhere on the predicted field must see the light next to it; at most one
    whole order on each side.
    """
    radius_um = xp.retinal_image_diameter_um(100.0) / 2.0
    m = int(np.ceil(radius_um / min(grid.pitch_x_um, grid.pitch_y_um)))
    return min(m, grid.rows, grid.cols)


def _with_orders_note(assessment, holograms):
    """Say how the light of the higher diffraction orders is counted."""
    if assessment is None or not holograms:
        return assessment
    frac = max(
        sp.prediction_account.higher_orders_mw / sp.prediction_account.input_mw for sp in holograms
    )
    g = holograms[0].grid
    margin_um = _orders_margin(g) * min(g.pitch_x_um, g.pitch_y_um)
    note = (
        f"Light diffracted into higher orders of the SLM pixel grid (up to {frac:.1%} of the "
        f"laser power here) is included as the neighbouring orders within {margin_um:.0f} um "
        "of the predicted field (the map wrapped, times the pixel envelope); orders further "
        "out are not evaluated."
    )
    return replace(assessment, notes=(*assessment.notes, note))
