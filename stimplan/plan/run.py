"""Planning a sequence: jobs, frames and exposure, in order."""

from __future__ import annotations

import tempfile
import threading
import time
from collections.abc import Callable
from dataclasses import replace

from ..batch import Task, parallel_workers, run_batch
from ..errors import ConfigError
from ..sequence import expand_timeline
from .jobs import plan_jobs, task_function
from .model import FramePlan, Plan, StimulusPlan
from .progress import TerminalProgress, stage_ticker
from .spool import (
    BYTES_PER_SLM_PIXEL,
    MEMORY_BUDGET_MB,
    REFERENCE_POWER_MW,
    stimulus_key,
)
from .wiring import (
    assess_frames,
    check_exposure_supported,
    with_orders_note,
    with_settling_note,
)

__all__ = ["plan_sequence", "resolve_frame"]


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
        ``True``: a tqdm bar per stage on stderr (quiet when stderr is not a
        terminal); ``False``: silent; a callable is called as
        ``progress(stage, done, total)`` (:mod:`stimplan.plan.progress`), also
        by the assessments the plan runs later on first use.
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
    check_exposure_supported(spec)  # before any hologram is computed
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
    terminal = TerminalProgress() if progress is True else None
    report = terminal if terminal is not None else (progress if callable(progress) else None)
    done = [0]
    lock = threading.Lock()

    def tick(_i=None):
        with lock:
            done[0] += 1
            if report is not None:
                report("holograms", done[0], total)

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
            task_function(jobs[i], i, spec, system, it_tick, spool=spool),
            (position[jobs[i].base],) if jobs[i].base >= 0 else (),
            jobs[i].kind,
            (n - lanes,) if chained and lanes <= n < n_bases else (),
        )
        for n, i in enumerate(order)
    ]
    t_start = time.perf_counter()
    try:
        batch = run_batch(tasks, scheduler=scheduler, on_done=tick)
    except BaseException:
        if terminal is not None:
            terminal.close()
        raise
    results = [batch[position[i]] for i in range(len(jobs))]
    plans: dict[str, StimulusPlan] = {}
    for job, sp in zip(jobs, results, strict=True):
        for n in job.names:
            plans[n] = sp
    ordered = list(results)
    t_holograms = time.perf_counter() - t_start
    frames = tuple(resolve_frame(fr, spec, plans) for fr in frames_spec)
    wl = spec.system.illumination.wavelength_nm
    cache: dict = {}
    try:
        exposure = with_orders_note(
            assess_frames(
                frames,
                plans,
                "hologram",
                wl,
                spec,
                cache=cache,
                progress=stage_ticker(report, "exposure"),
            ),
            ordered,
        )
        exposure = with_settling_note(exposure, spec, frames)
    finally:
        if terminal is not None:
            terminal.close()
    # per stage: the sum over the distinct holograms (they run in parallel, so the
    # stages can add up to more than the wall time of the batch, which is given too)
    timings = {
        stage: sum(sp.timings_s.get(stage, 0.0) for sp in ordered)
        for stage in ("holograms", "predictions", "readouts")
    }
    timings["hologram_batch_wall"] = t_holograms
    timings["exposure"] = time.perf_counter() - t_start - t_holograms
    return Plan(
        spec,
        plans,
        tuple(ordered),
        frames,
        exposure,
        spool=spool_dir,
        timings_s=timings,
        maxima_cache=cache,
        progress=report,
    )


def resolve_frame(fr, spec, plans) -> FramePlan:
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
            step_index=fr.step_index,
            pulse_delay_ms=fr.pulse_delay_ms,
        )
    if fr.irradiance_mw_per_mm2 is not None:
        if name_plan.hologram_figures is None:
            raise ConfigError(
                f"steps[{fr.step_index}].irradiance_mw_per_mm2",
                fr.irradiance_mw_per_mm2,
                "a stimulus that turns at least one implant pixel ON",
                f"{name!r} lights no pixel's photodiode half: give power_mw instead",
            )
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
        step_index=fr.step_index,
        pulse_delay_ms=fr.pulse_delay_ms,
    )
