"""Fringing-field crosstalk: the sub-pixel model against closed forms and published trends."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from stimplan.errors import ConfigError
from stimplan.holography import predict_retina
from stimplan.holography.crosstalk import edge_weights, fringed_far_power
from stimplan.optics.system import SLM

from .conftest import make_system


def _with_fringing(system, fringing_um: float, samples: int | None = None):
    return replace(
        system, slm=replace(system.slm, fringing_um=fringing_um, fringing_samples=samples)
    )


def _grating(rows: int, cols: int, period_px: int) -> np.ndarray:
    """A blazed staircase of ``period_px`` levels along x, phase 2 pi j / N on pixel j."""
    x = np.arange(cols)
    return np.tile((2 * np.pi * (x % period_px) / period_px).astype(np.float32), (rows, 1))


def _first_order(power: np.ndarray, period_px: int) -> float:
    """Power in the +1 order's bin on a grid of one sample per order sample (no padding)."""
    rows, cols = power.shape
    return float(power[rows // 2, (cols // 2 + cols // period_px) % cols])


def _flyback_efficiency(period_px: int, fringing_px: float) -> float:
    """|c_1|² of the staircase whose pixel edges are linear transitions of width w.

    Derived by hand: on one period (pixel units, k = 2 pi / N) the profile is flat at
    2 pi j / N on [j + w/2, j + 1 - w/2] and linear from one level to the next on
    [j + 1 - w/2, j + 1 + w/2] (the last edge is the reset back to 0, the flyback). A
    segment with phase a + b (x - x0) on [x0, x0 + L] contributes
    exp(i (a - k x0)) (exp(i (b - k) L) - 1) / (i (b - k)); c_1 is their sum over N.
    """
    n, w = period_px, fringing_px
    k = 2 * np.pi / n
    lv = 2 * np.pi * np.arange(n) / n
    total = 0j
    for j in range(n):
        a, b = j + w / 2, j + 1 - w / 2
        total += np.exp(1j * lv[j]) * (np.exp(-1j * k * b) - np.exp(-1j * k * a)) / (-1j * k)
        if w > 0:
            x0 = j + 1 - w / 2
            d = (lv[(j + 1) % n] - lv[j]) / w - k
            seg = w if abs(d) < 1e-12 else (np.exp(1j * d * w) - 1) / (1j * d)
            total += np.exp(1j * (lv[j] - k * x0)) * seg
    return abs(total / n) ** 2


def test_flyback_helper_matches_the_continuous_ramp_closed_form():
    # Source: derived by hand (module docstring of stimplan.holography.crosstalk): a
    # continuous 2 pi ramp of period L whose reset is a linear flyback of width w has
    # eta_1 = (1 - w / L)^2 (the flyback region's integrand exp(-2 pi i x / w) sums to
    # zero). Many pixels per period approach the ramp; the steps' own transitions only
    # smooth the staircase towards it, so the staircase limit is sinc^2(1/N) -> 1.
    n, w = 4096, 0.5  # the staircase of 4096 levels is the ramp to 1e-7
    assert _flyback_efficiency(n, w) == pytest.approx((1 - w / n) ** 2, rel=1e-6)
    n, w = 64, 0.0
    assert _flyback_efficiency(n, w) == pytest.approx(np.sinc(1 / n) ** 2, rel=1e-12)


@pytest.mark.parametrize("fill_factor", [1.0, 0.9])
@pytest.mark.parametrize("samples", [2, 4])
def test_zero_fringing_reproduces_the_pixel_envelope_prediction(fill_factor, samples, rng):
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §4.2.2, eq. (4-28): a
    # pixel of width a has the envelope sinc^2(a u); q cells of width p/q with one field
    # value give sinc(u p/q) D_q(u)/q = sinc(u p), so the sub-pixel path without
    # fringing must reproduce the ideal (pixel-envelope) prediction.
    n = 64
    system = make_system(n, fill_factor=fill_factor, profile="flat")
    phase = rng.uniform(0, 2 * np.pi, (n, n))
    ideal = predict_retina(phase, system, oversample=2, source_blur=False)
    amp = system.illumination.amplitude(system.slm)
    pupil = system.pupil_mask().astype(np.float32)
    power = fringed_far_power(
        amp,
        phase.astype(np.float32),
        None,
        pupil,
        ideal.grid.shape,
        fringing_px=0.0,
        samples_per_pixel=samples,
        fill_factor=fill_factor,
        scale=1.0,
    )
    ref = ideal.sample_power_mw
    assert np.max(np.abs(power - ref)) <= 2e-6 * float(ref.max())


@pytest.mark.parametrize("period_px", [2, 4, 8, 16, 32])
def test_blazed_grating_without_crosstalk_is_sinc_squared(period_px):
    # Source: G. J. Swanson, "Binary optics technology: the theory and design of
    # multi-level diffractive optical elements", MIT Lincoln Lab. Tech. Rep. 854 (1989):
    # eta_1 = sinc^2(1/N) for N levels (N = 2: the 0/pi grating, 4/pi^2, Goodman §4.4;
    # its +1 order sits at the order's edge, the -1 order's bin, equal by symmetry).
    rows, cols = 2, 1024
    amp = np.full((rows, cols), 1 / np.sqrt(rows * cols), np.float32)
    power = fringed_far_power(
        amp,
        _grating(rows, cols, period_px),
        None,
        None,
        (rows, cols),
        fringing_px=0.0,
        samples_per_pixel=4,
        fill_factor=1.0,
        scale=1.0,
    )
    assert _first_order(power, period_px) == pytest.approx(np.sinc(1 / period_px) ** 2, rel=1e-5)


@pytest.mark.parametrize("fringing_px", [0.25, 0.5])
def test_fringing_lowers_the_first_order_more_at_high_spatial_frequency(fringing_px):
    # Source: the trend - Persson et al., Opt. Express 20, 22334 (2012), §1: pixel
    # crosstalk comes from gradual voltage changes ("fringing fields") across the border
    # of neighbouring pixels and from elastic forces that prevent abrupt changes of the
    # phase; Moser et al., Opt. Express 27, 25046 (2019), abstract: the realised wavefront
    # may deviate significantly from the ideal model of a uniform response per pixel,
    # independent of its neighbours. Finer gratings have more pixel edges per period, so
    # the loss grows with spatial frequency; the papers' measured curves were not at hand
    # and are not pinned here. The value: the exact Fourier coefficient of the linear-
    # transition profile (_flyback_efficiency, derived by hand above) at 16 sub-samples.
    rows, cols, q = 2, 1024, 16
    amp = np.full((rows, cols), 1 / np.sqrt(rows * cols), np.float32)
    ratios = []
    for period in (2, 4, 8, 16, 32):
        power = fringed_far_power(
            amp,
            _grating(rows, cols, period),
            None,
            None,
            (rows, cols),
            fringing_px=fringing_px,
            samples_per_pixel=q,
            fill_factor=1.0,
            scale=1.0,
        )
        eta = _first_order(power, period)
        # 1024 px hold cols / period flybacks; the SLM's border holds one fewer (its edge
        # pixels have no neighbour): 2 % of the loss at 32 px per period; q = 16 samples a
        # transition of w >= q^-1 * 4 px to 1.7 % of its loss (measured bound, common practice)
        assert eta == pytest.approx(_flyback_efficiency(period, fringing_px), abs=2.5e-3)
        ratios.append(eta / np.sinc(1 / period) ** 2)
    # the blazed gratings (4 .. 32 px per period): the loss grows with spatial frequency
    assert all(a < b for a, b in zip(ratios[1:-1], ratios[2:], strict=True))
    # the binary 0/pi grating (2 px) has two equal edges and no flyback: its ratio is
    # above the 4-level one (the profile's exact coefficient says the same)
    assert ratios[0] > ratios[1]
    exact = [_flyback_efficiency(p, fringing_px) / np.sinc(1 / p) ** 2 for p in (2, 4)]
    assert exact[0] > exact[1]
    # the continuous-ramp closed form (1 - w/L)^2 of the flyback (derived above): the
    # staircases' ratios lie above it (checked here, not derived: their small steps'
    # transitions bring the staircase towards the ramp) and meet it at 32 px per period
    for period, ratio in zip((4, 8, 16, 32), ratios[1:], strict=True):
        assert ratio > (1 - fringing_px / period) ** 2 - 2.5e-3
    assert ratios[-1] == pytest.approx((1 - fringing_px / 32) ** 2, abs=3e-3)


def test_power_account_sums_to_the_input_with_fringing(rng):
    # Source: conservation of energy; Parseval for the unitary DFT (Goodman, §2.1).
    n = 128
    system = make_system(
        n, power_mw=7.5, fill_factor=0.9, zero_order_fraction=0.05, transmission=0.8
    )
    system = _with_fringing(system, 2.0)
    phase = rng.uniform(0, 2 * np.pi, (n, n))
    region = np.zeros(system.prediction_grid(2).shape, np.float32)
    region[20:60, 20:60] = 1.0  # towards the field's edge
    pred = predict_retina(phase, system, oversample=2, signal_region=region)
    acc = pred.account
    assert acc.total_mw() == pytest.approx(7.5, rel=1e-4)
    for name in ("pixel_gaps_mw", "higher_orders_mw", "ocular_absorbed_mw", "zero_order_mw"):
        assert getattr(acc, name) >= -1e-9
    assert float(pred.sample_power_mw.sum(dtype=np.float64)) == pytest.approx(
        acc.retina_mw, rel=1e-4
    )
    ideal = predict_retina(
        phase,
        replace(system, slm=replace(system.slm, fringing_um=0.0)),
        oversample=2,
        signal_region=region,
    )
    assert ideal.account.crosstalk_mw is None
    assert acc.crosstalk_mw == pytest.approx(ideal.account.signal_mw - acc.signal_mw, rel=1e-4)
    assert acc.crosstalk_mw > 0
    assert acc.scaled(2.0).crosstalk_mw == pytest.approx(2 * acc.crosstalk_mw)


def test_random_phase_hologram_loses_efficiency_towards_the_field_edge(rng):
    # Source: the trend - issue 17 quotes a 10-25 % efficiency loss of random-phase
    # holograms on small pixels, more towards the field edge, with the lost light
    # feeding the zero order and ghosts (Persson et al., Opt. Express 20, 22334 (2012);
    # Moser et al., Opt. Express 27, 25046 (2019)). Stated ratio: a fringing width of one
    # pitch (e.g. 4 um on 4 um pixels, here 8 on 8) gives a loss of that order at the
    # field's edge; the shares are not pinned to a published number, only their order,
    # the growth with fringing and with the distance from the axis.
    n = 128
    system = make_system(n, profile="flat")
    phase = rng.uniform(0, 2 * np.pi, (n, n))
    ideal = predict_retina(phase, system, oversample=2, source_blur=False)
    rows, cols = ideal.grid.shape
    v = (np.arange(rows) - rows // 2) / rows  # u p along rows, in [-1/2, 1/2)
    u = (np.arange(cols) - cols // 2) / cols
    radius = np.maximum(np.abs(v)[:, None], np.abs(u)[None, :])
    inner = radius < 0.1
    outer = (radius >= 0.3) & (radius < 0.45)
    a = ideal.sample_power_mw
    losses = []
    for fringing_um in (2.0, 4.0, 8.0):
        b = predict_retina(phase, _with_fringing(system, fringing_um), source_blur=False)
        b = b.sample_power_mw
        loss_outer = 1 - b[outer].sum() / a[outer].sum()
        # the light goes towards the axis: the inner field (zero order) gains
        assert b[inner].sum() > a[inner].sum()
        losses.append(loss_outer)
    assert losses[0] < losses[1] < losses[2]
    assert 0.10 < losses[2] < 0.25


def test_fringing_is_refused_outside_its_range():
    # common practice: a transition at each pixel edge is at most one pitch wide
    with pytest.raises(ConfigError, match="fringing_um"):
        SLM(64, 64, 8.0, 1.0, 256, fringing_um=9.0)
    with pytest.raises(ConfigError, match="fringing_um"):
        SLM(64, 64, 8.0, 1.0, 256, fringing_um=-0.1)
    with pytest.raises(ConfigError, match="fringing_samples"):
        SLM(64, 64, 8.0, 1.0, 256, fringing_um=1.0, fringing_samples=1)
    # 2 / w samples at least: a 2 um transition on 8 um pixels (w = 1/4) needs 8
    with pytest.raises(ConfigError, match="fringing_samples"):
        SLM(64, 64, 8.0, 1.0, 256, fringing_um=2.0, fringing_samples=4)
    with pytest.raises(ConfigError, match="fringing_um"):
        SLM(64, 64, 8.0, 1.0, 256, fringing_um=0.5)  # under pitch / 8
    assert SLM(64, 64, 8.0, 1.0, 256, fringing_um=2.0).fringing_samples_per_pixel == 16
    assert SLM(64, 64, 8.0, 1.0, 256, fringing_um=4.0).fringing_samples_per_pixel == 8
    assert SLM(64, 64, 8.0, 1.0, 256).fringing_samples_per_pixel == 1
    with pytest.raises(ConfigError, match="fringing_px"):
        edge_weights(0.0, 1.5)


def test_edge_weights_are_the_box_overlaps():
    # Source: derived by hand: a box of width w centred at t (pixel units from the pixel
    # centre) overlaps the right neighbour by t + w/2 - 1/2 when positive.
    assert edge_weights(0.5, 0.5) == pytest.approx((0.0, 0.5, 0.5))
    assert edge_weights(-0.5, 0.5) == pytest.approx((0.5, 0.5, 0.0))
    assert edge_weights(0.0, 0.5) == pytest.approx((0.0, 1.0, 0.0))
    assert edge_weights(0.4, 0.4) == pytest.approx((0.0, 0.75, 0.25))


SEQUENCE = """\
format = "stimplan-sequence/1"
[eye]
preset = "human"
[optics.slm]
pixels_x = 128
pixels_y = 128
pitch_um = 8.0
fringing_um = {fringing}
[stimuli.spot]
kind = "spot"
diameter_um = 100.0
[[steps]]
stimulus = "spot"
duration_ms = 100
pulse_ms = 10
rate_hz = 10
"""


def test_sequence_key_builds_the_slm_and_adds_memory():
    # common practice: a key of the file reaches the object it configures, and the
    # estimate counts the accumulator plane the sub-pixel components need
    from stimplan.plan.memory import FRINGING_BYTES_PER_SAMPLE, estimate_peak_bytes
    from stimplan.sequence.load import parse_sequence

    ideal = parse_sequence(SEQUENCE.format(fringing=0.0))
    fringed = parse_sequence(SEQUENCE.format(fringing=4.0))
    assert fringed.system.slm.fringing_um == 4.0
    assert fringed.system.slm.fringing_samples_per_pixel == 8
    a = estimate_peak_bytes(ideal, lanes=1)
    b = estimate_peak_bytes(fringed, lanes=1)
    assert b.jobs_bytes - a.jobs_bytes >= FRINGING_BYTES_PER_SAMPLE * a.retinal_samples
    with pytest.raises(ConfigError, match="fringing_um"):
        parse_sequence(SEQUENCE.format(fringing=9.0))


def test_a_plan_with_fringing_is_refused_before_any_hologram():
    # Safety rule of the project: a regime whose exposure the estimate cannot bound is
    # refused with a clear error (here the neighbouring orders of fringed pixels)
    from stimplan.plan import plan_sequence
    from stimplan.sequence.load import parse_sequence

    fringed = parse_sequence(SEQUENCE.format(fringing=4.0))
    with pytest.raises(ConfigError, match=r"optics\.slm\.fringing_um.*not bounded"):
        plan_sequence(fringed, progress=False)
