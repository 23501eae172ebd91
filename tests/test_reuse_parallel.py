"""Reuse across a sequence, and parallel batches (local threads, dask.distributed)."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.planner import plan_jobs, plan_sequence
from stimplan.sequence import parse_sequence

from .scenarios import small_sequence

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


def test_reversed_checkerboard_starts_from_its_partner():
    # common practice: a warm start from a related solution (Fienup, Appl. Opt. 21, 2758
    # (1982), starting guesses); the reversed board is its partner moved by one check.
    extra = """
[stimuli.checks]
kind = "checkerboard"
check_um = 110

[[steps]]
alternate = ["checks", "checks:reversed"]
alternate_ms = 250
duration_ms = 1000
pulse_ms = 10
rate_hz = 20
power_mw = 1.0
"""
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
