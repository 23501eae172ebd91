"""The light budget of a stimulus, laser to photodiodes."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from stimplan.budget import (
    BUDGET_LABELS,
    gaussian_fraction_on_aperture,
    light_budget,
    quantisation_efficiency,
)
from stimplan.holography.propagation import PowerAccount
from stimplan.plan import plan_sequence
from stimplan.present.summary import plan_summary
from stimplan.sequence import parse_sequence

from .scenarios import gui_sequence


@pytest.mark.parametrize(("w", "width", "height"), [(2.3, 8.192, 8.192), (3.0, 4.0, 2.0)])
def test_gaussian_share_on_the_slm_matches_numerical_integration(w, width, height):
    # Source: Siegman, Lasers (1986), §17.1: I(r) = (2P / (pi w^2)) exp(-2 r^2 / w^2) for
    # the 1/e^2 radius w; integrated here with scipy over the rectangle.
    def intensity(y, x):
        return 2.0 / (math.pi * w * w) * math.exp(-2.0 * (x * x + y * y) / (w * w))

    ref, _ = integrate.dblquad(intensity, -width / 2, width / 2, -height / 2, height / 2)
    got = gaussian_fraction_on_aperture(waist_mm=w, width_mm=width, height_mm=height)
    assert got == pytest.approx(ref, rel=1e-7)


@pytest.mark.parametrize("levels", [2, 4, 8, 256])
def test_quantisation_efficiency_matches_the_first_order_of_a_staircase_grating(levels):
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §4.2 (a periodic phase
    # grating's orders are the Fourier coefficients of exp(i phi) over one period): the
    # N-level staircase approximating a 2 pi ramp, sampled finely, through numpy's FFT.
    m = 2048  # samples per level (sampling error ~ (pi / (N m))^2 / 3)
    phase = np.repeat(2 * np.pi * np.arange(levels) / levels, m)
    coeffs = np.fft.fft(np.exp(1j * phase)) / phase.size
    first = abs(coeffs[1]) ** 2
    assert quantisation_efficiency(levels) == pytest.approx(first, rel=1e-6)


def test_an_ideal_slm_delivers_all_its_light():
    # common practice (energy conservation): fill factor 1, no zero order, a clear eye
    acc = PowerAccount(
        input_mw=2.0,
        pixel_gaps_mw=0.0,
        pupil_clipped_mw=0.0,
        higher_orders_mw=0.0,
        ocular_absorbed_mw=0.0,
        zero_order_mw=0.0,
        field_mw=2.0,
    )
    b = light_budget(
        acc,
        slm_fraction=1.0,
        fill_factor=1.0,
        zero_order_fraction=0.0,
        phase_levels=256,
        eye_transmission=1.0,
        retina_mw=2.0,
        footprint_mw=1.5,
        on_photodiodes_mw=0.9,
        off_photodiodes_mw=0.1,
    )
    assert b.deliverable_mw == pytest.approx(2.0)
    assert b.total_mw() == pytest.approx(2.0)
    assert b.between_photodiodes_mw == pytest.approx(0.5)
    assert b.outside_array_mw == pytest.approx(0.5)
    assert b.on_share_of_deliverable == pytest.approx(0.45)


@pytest.fixture(scope="module")
def planned():
    plan = plan_sequence(parse_sequence(gui_sequence(1.0)), progress=False)
    try:
        yield plan, plan_summary(plan)
    finally:
        plan.close()


def test_each_stimulus_budget_sums_to_the_laser_power(planned):
    # common practice (energy conservation): the disjoint entries sum to the laser power,
    # checked within 0.1 %
    plan, summary = planned
    for row, sp in zip(summary["stimuli"], plan.holograms, strict=True):
        b = row["light_budget"]
        entries = [b[k] for k in BUDGET_LABELS]
        assert sum(entries) == pytest.approx(b["laser_mw"], rel=1e-3)
        assert min(entries) >= -1e-9 * b["laser_mw"]
        # the laser is what reaches the SLM over the Gaussian's share on it (Siegman §17.1)
        slm = plan.spec.system.slm
        share = gaussian_fraction_on_aperture(
            waist_mm=plan.spec.system.illumination.waist_mm,
            width_mm=slm.pixels_x * slm.pitch_um * 1e-3,
            height_mm=slm.pixels_y * slm.pitch_um * 1e-3,
        )
        assert b["laser_mw"] * share == pytest.approx(row["laser_power_mw"], rel=1e-9)
        # the ON photodiodes get what the per-pixel readout sums on them (µW -> mW)
        on_uw = row["on_pixel_power_uw"]["hologram"] * int(sp.on.sum())
        assert b["on_photodiodes_mw"] == pytest.approx(on_uw * 1e-3, rel=1e-5)
        assert 0 < b["on_share_of_laser"] <= b["on_share_of_deliverable"] <= 1.0
