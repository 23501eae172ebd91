"""Reuse across a sequence, and parallel batches (local threads, dask.distributed)."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.plan import plan_jobs, plan_sequence
from stimplan.reuse import (
    envelope_change,
    proposed_translations,
    shift_in_samples,
    translation_between,
)
from stimplan.sequence import parse_sequence

from .scenarios import drifting_steps, reversal_step, small_sequence

MOVED = """
[stimuli.spot_moved]
kind = "spot"
diameter_um = 300
center_x_um = 180
center_y_um = -20

[[steps]]
stimulus = "spot_moved"
duration_ms = 300
pulse_ms = 5
rate_hz = 10
power_mw = 1.5
"""


def _spec(extra: str = "", aware: bool = True):
    text = small_sequence() + extra
    if not aware:
        text = text.replace('initial = "lens"', 'initial = "lens"\nimplant_aware = false')
    return parse_sequence(text)


def test_translated_stimulus_reuses_the_hologram_within_2_percent():
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §2.1.3 (shift theorem):
    # a linear phase ramp translates the far field; the reused hologram's per-pixel
    # powers must match a fresh computation's within 2 %.
    spec = _spec(MOVED, aware=False)
    reused = plan_sequence(spec, progress=False)
    fresh = plan_sequence(spec, progress=False, reuse=False)
    a, b = reused.stimuli["spot_moved"], fresh.stimuli["spot_moved"]
    assert a.hologram.reused_from is not None and b.hologram.reused_from is None
    on = a.on
    assert on.sum() > 10
    np.testing.assert_allclose(a.readout.power_uw[on], b.readout.power_uw[on], rtol=0.02)


def _drift(phases: int) -> str:
    return drifting_steps(phases, duration_ms=50, pulse_ms=5)


def test_a_grating_is_periodic_so_a_phase_step_has_a_short_translation():
    # Source: a grating of period P is unchanged by a translation of P along its
    # modulation (common practice), so a 342 deg step is also a -18 deg step.
    from stimplan.stimuli import Grating

    a = Grating(period_um=200.0, phase_deg=0.0)
    b = Grating(period_um=200.0, phase_deg=342.0)
    props = proposed_translations(a, b)
    assert props[0] == pytest.approx((10.0, 0.0))
    assert (-190.0, 0.0) == pytest.approx(props[1])


def test_a_drifting_grating_is_served_by_few_computed_holograms():
    # Each translated phase takes a computed hologram of its family whose pixel envelope
    # changes by at most the tolerance over its pattern (Goodman, Introduction to
    # Fourier Optics, 3rd ed., eq. 4-28); the computed ones are chosen greedily.
    # # common practice
    spec = _spec(_drift(16), aware=False)
    names = [n for n in spec.stimuli if n.startswith("drift_")]
    system = spec.system
    grid = system.design_grid()
    jobs = plan_jobs(spec, [[n] for n in names], system)
    fresh = [i for i, j in enumerate(jobs) if j.kind == "fresh"]
    assert 1 <= len(fresh) < len(names) // 3
    region = spec.implant.rasterize(grid, "cell").coverage_image() > 0
    for i, j in enumerate(jobs):
        if j.kind == "fresh":
            continue
        assert j.kind == "translate" and j.base in fresh
        a, b = spec.stimuli[names[j.base]], spec.stimuli[names[i]]
        t = translation_between(a, b, grid)
        assert shift_in_samples(t, grid) == pytest.approx(j.shift_rc)
        lit = (b.render(grid) > 0) & region
        assert envelope_change(lit, j.shift_rc, system.slm.fill_factor) <= 0.05 + 1e-3
    plan = plan_sequence(spec, progress=False)
    computed = {sp.name for sp in plan.holograms if sp.hologram.reused_from is None}
    reused = [sp.hologram.reused_from for sp in plan.holograms if sp.hologram.reused_from]
    assert reused and set(reused) <= computed


def test_reversed_checkerboard_starts_from_its_partner():
    # common practice: a warm start from a related solution (Fienup, Appl. Opt. 21, 2758
    # (1982), starting guesses); the reversed board is its partner moved by one check.
    extra = '\n[stimuli.checks]\nkind = "checkerboard"\ncheck_um = 110\n' + reversal_step()
    spec = _spec(extra)
    system = spec.system
    jobs = plan_jobs(spec, [["checks"], ["checks:reversed"]], system)
    assert [j.kind for j in jobs] == ["fresh", "warm"]
    plan = plan_sequence(spec, progress=False)
    a, b = plan.stimuli["checks"], plan.stimuli["checks:reversed"]
    assert b.hologram.settings.iterations < a.hologram.settings.iterations
    assert b.hologram_figures.on_cv <= 0.10
    assert b.hologram_figures.on_power_uw == pytest.approx(a.hologram_figures.on_power_uw, rel=0.1)


def test_thread_batch_equals_serial_run():
    # common practice: results depend on the seeds only, not on the scheduler
    spec = _spec()
    a = plan_sequence(spec, progress=False, scheduler="serial")
    b = plan_sequence(spec, progress=False, scheduler="threads")
    for x, y in zip(a.holograms, b.holograms, strict=True):
        assert np.array_equal(x.hologram.grey, y.hologram.grey)
        np.testing.assert_array_equal(x.readout.power_uw, y.readout.power_uw)


def test_local_cluster_batch_equals_serial_run():
    # common practice: a dask.distributed cluster gives the serial results (same seeds)
    import distributed  # in the test extras

    spec = _spec()
    serial = plan_sequence(spec, progress=False, scheduler="serial")
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        remote = plan_sequence(spec, progress=False, scheduler=client)
        by_address = plan_sequence(spec, progress=False, scheduler=cluster.scheduler_address)
    for x, y, z in zip(serial.holograms, remote.holograms, by_address.holograms, strict=True):
        assert np.array_equal(x.hologram.grey, y.hologram.grey)
        assert np.array_equal(x.hologram.grey, z.hologram.grey)
        np.testing.assert_array_equal(x.readout.power_uw, y.readout.power_uw)
    assert remote.exposure.worst_ratio == serial.exposure.worst_ratio


def test_start_order_hints_keep_results_and_order():
    # common practice: an ordering hint only delays a task's start; it receives nothing
    import threading
    import time

    from stimplan.batch import Task, run_batch
    from stimplan.errors import ConfigError

    events: list[tuple[str, int, float]] = []
    lock = threading.Lock()

    def job(k):
        def run(*deps, workers):
            with lock:
                events.append(("start", k, time.perf_counter()))
            time.sleep(0.05)
            with lock:
                events.append(("end", k, time.perf_counter()))
            return (k, len(deps))

        return run

    tasks = [Task(job(0)), Task(job(1)), Task(job(2), after=(0,)), Task(job(3), deps=(1,))]
    got = run_batch(tasks, scheduler="threads", num_workers=2)
    assert got == [(0, 0), (1, 0), (2, 0), (3, 1)]  # task 2 gets no result from task 0
    when = {(kind, k): t for kind, k, t in events}
    assert when[("start", 2)] >= when[("end", 0)]
    assert run_batch(tasks, scheduler="serial") == got
    with pytest.raises(ConfigError):
        run_batch([Task(job(0), after=(0,))], scheduler="threads")
