"""Propagation checked against closed-form results of diffraction theory."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special

from stimplan.holography import far_field, predict_retina, quantize_phase
from stimplan.holography.propagation import pixel_aperture_envelope

from .conftest import make_system


def _order_power(pred, row_off: int, col_off: int, half: int) -> float:
    """Power in a (2 half + 1)² window around a far-field position (design samples)."""
    s = pred.oversample
    r0, c0 = pred.grid.centre_index
    r, c = r0 + s * row_off, c0 + s * col_off
    hs = half * s
    return float(pred.sample_power_mw[r - hs : r + hs + 1, c - hs : c + hs + 1].sum())


@pytest.mark.parametrize("levels", [2, 4, 8, 16])
def test_multilevel_blazed_grating_efficiency(levels):
    # Source: Swanson, "Binary optics technology", MIT Lincoln Lab. TR-854 (1989);
    # Goodman, Introduction to Fourier Optics, 3rd ed.: eta_1 = sinc^2(1/L).
    # Two pixels per level (period 2L pixels): the pixelated staircase is the
    # continuous L-level staircase, and its +1 order lies well inside the field.
    n = 512
    system = make_system(n, levels=levels, fill_factor=1.0)
    cols = np.arange(n)[np.newaxis, :].repeat(n, axis=0)
    ramp = 2 * np.pi * ((cols // 2) % levels) / levels
    lv = quantize_phase(ramp, levels)
    phase = 2 * np.pi * lv.astype(np.float64) / levels
    pred = predict_retina(phase, system, oversample=2)
    order_col = n // (2 * levels)  # +1 order at N / period samples
    eta = _order_power(pred, 0, order_col, 6) / pred.power_mw
    expected = np.sinc(1.0 / levels) ** 2
    assert eta == pytest.approx(expected, rel=0.01)


def test_binary_phase_grating_orders():
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §4.4: a 0/pi phase
    # grating of 50 % duty cycle has no zero order and 4/pi^2 in each first order.
    n, period = 256, 8
    system = make_system(n, levels=2, fill_factor=1.0)
    cols = np.arange(n)[np.newaxis, :].repeat(n, axis=0)
    phase = np.where((cols % period) < period // 2, 0.0, np.pi)
    pred = predict_retina(phase, system, oversample=2)
    k = n // period
    p0 = _order_power(pred, 0, 0, 4) / pred.power_mw
    p_plus = _order_power(pred, 0, k, 4) / pred.power_mw
    p_minus = _order_power(pred, 0, -k, 4) / pred.power_mw
    assert p0 < 1e-4
    assert p_plus == pytest.approx(4 / np.pi**2, rel=0.01)
    assert p_minus == pytest.approx(4 / np.pi**2, rel=0.01)


def test_airy_pattern_of_circular_aperture():
    # Source: Born & Wolf, Principles of Optics, 7th ed., §8.5.2: I = [2 J1(v)/v]^2,
    # v = pi D sin(theta) / lambda, first zero at sin(theta) = 1.2197 lambda / D.
    n = 512
    pupil_mm = 0.8  # 100 SLM pixels across, the eye's pupil is the aperture
    system = make_system(n, profile="flat", pupil_mm=pupil_mm, fill_factor=1.0)
    with pytest.warns(UserWarning, match="pupil"):
        pred = predict_retina(np.zeros((n, n)), system, oversample=4)
    r0, c0 = pred.grid.centre_index
    prof = pred.irradiance_mw_per_mm2[r0, c0:].astype(np.float64)
    prof /= prof[0]
    x_um = pred.grid.x_um[c0:]
    lam_mm = system.illumination.wavelength_mm
    f_mm = system.effective_focal_mm
    v = np.pi * pupil_mm * (x_um * 1e-3 / f_mm) / lam_mm
    with np.errstate(invalid="ignore", divide="ignore"):
        airy = np.where(v == 0, 1.0, (2 * special.j1(v) / v) ** 2)
    first_zero_um = 1.2197 * lam_mm * f_mm / pupil_mm * 1e3
    near = x_um < 2.5 * first_zero_um
    assert np.max(np.abs(prof[near] - airy[near])) < 0.02
    i_min = int(np.argmin(np.where(x_um < 1.5 * first_zero_um, prof, np.inf)))
    assert abs(x_um[i_min] - first_zero_um) <= pred.grid.pitch_x_um


def test_pixel_aperture_envelope_is_sinc_squared():
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §4.2.2, eq. (4-28):
    # the Fraunhofer pattern of a rectangular aperture of width a is sinc^2(a u).
    n, ff = 128, 0.64
    # one lit pixel: its DFT is flat, so the prediction is the envelope itself
    from stimplan.optics.system import SLM, Eye, Illumination, OpticalSystem, Relay

    amp = np.zeros((n, n), np.float32)
    amp[n // 2, n // 2] = 1.0
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "amp.npy"
        np.save(path, amp)
        system = OpticalSystem(
            SLM(n, n, 8.0, ff, 256),
            Illumination(880.0, 1.0, "file", amplitude_file=str(path)),
            Relay(1.0),
            Eye(288.0, 20.0, 1.0),
        )
        pred = predict_retina(np.zeros((n, n)), system, oversample=2)
    r0, c0 = pred.grid.centre_index
    cut = pred.irradiance_mw_per_mm2[r0, :] / pred.irradiance_mw_per_mm2[r0, c0]
    a_mm = 8e-3 * math.sqrt(ff)
    u = pred.grid.x_um * 1e-3 / (system.illumination.wavelength_mm * system.effective_focal_mm)
    np.testing.assert_allclose(cut, np.sinc(a_mm * u) ** 2, atol=1e-5)
    env = pixel_aperture_envelope((8, 8), (8, 8), 1.0)
    assert env[4, 4] == pytest.approx(1.0)


def test_gaussian_beam_far_field_divergence():
    # Source: Siegman, Lasers (1986), ch. 17: far-field half-angle theta = lambda/(pi w0);
    # on the retina the 1/e^2 radius is theta * f_eff.
    n = 256
    w0_mm = 0.25
    system = make_system(n, waist_mm=w0_mm, fill_factor=1.0, magnification=2.0)
    pred = predict_retina(np.zeros((n, n)), system, oversample=4)
    irr = pred.irradiance_mw_per_mm2.astype(np.float64)
    x = pred.grid.x_um[np.newaxis, :]
    second_moment = float((irr * x**2).sum() / irr.sum())
    radius_um = 2.0 * math.sqrt(second_moment)  # I ~ exp(-2 x^2 / W^2) -> <x^2> = W^2/4
    theta = system.illumination.wavelength_mm / (math.pi * w0_mm * system.relay.magnification)
    expected_um = theta * system.eye.focal_length_mm * 1e3
    assert radius_um == pytest.approx(expected_um, rel=0.02)


def test_parseval_far_field(rng):
    # Source: Parseval's theorem for the unitary DFT (Goodman, 3rd ed., §2.1).
    e = (rng.standard_normal((200, 300)) + 1j * rng.standard_normal((200, 300))).astype(
        np.complex64
    )
    p_near = float(np.sum(np.abs(e.astype(np.complex128)) ** 2))
    f = far_field(e.copy())
    assert float(np.sum(np.abs(f.astype(np.complex128)) ** 2)) == pytest.approx(p_near, rel=1e-5)


@pytest.mark.parametrize("workers", [1, -1])
@pytest.mark.parametrize(("shape", "padded"), [((64, 48), (128, 96)), ((33, 50), (70, 101))])
def test_fused_far_power_equals_the_centred_dft(rng, shape, padded, workers):
    # Source: the centred unitary DFT (Goodman, 3rd ed., §2.1), written the plain way:
    # |fftshift(fft2(ifftshift(pad(a exp(i phi) pupil))))|^2 times a weight.
    from stimplan.holography.propagation import _far_power, pad_centered

    amp = rng.uniform(0.0, 1.0, shape).astype(np.float32)
    phase = rng.uniform(0.0, 2 * np.pi, shape).astype(np.float32)
    pupil = (rng.uniform(0.0, 1.0, shape) > 0.2).astype(np.float32)
    w_rows = rng.uniform(0.5, 1.0, padded[0]).astype(np.float32)
    w_cols = rng.uniform(0.5, 1.0, padded[1]).astype(np.float32)
    weight = np.outer(w_rows, w_cols)
    field = pad_centered((amp * np.exp(1j * phase) * pupil).astype(np.complex128), padded)
    want = np.abs(far_field(field)) ** 2 * weight * 0.7
    got = _far_power(amp, phase, pupil, padded, w_rows, w_cols, 0.7, workers)
    np.testing.assert_allclose(got, want, rtol=1e-4, atol=1e-6 * float(want.max()))
    # the work plane is reused: a second, different call must not see the first
    got = _far_power(amp[::-1].copy(), phase, pupil, padded, w_rows, w_cols, 0.7, workers)
    field = pad_centered((amp[::-1] * np.exp(1j * phase) * pupil).astype(np.complex128), padded)
    want = np.abs(far_field(field)) ** 2 * weight * 0.7
    np.testing.assert_allclose(got, want, rtol=1e-4, atol=1e-6 * float(want.max()))


@pytest.mark.parametrize(
    "kwargs",
    [
        {"fill_factor": 0.9, "zero_order_fraction": 0.05, "transmission": 0.8, "pupil_mm": 1.5},
        {"fill_factor": 0.6, "zero_order_fraction": 0.2, "transmission": 0.5},
    ],
)
def test_power_account_sums_to_input(kwargs, rng):
    # Source: conservation of energy; Parseval for the unitary DFT (Goodman, §2.1).
    n = 128
    system = make_system(n, power_mw=7.5, **kwargs)
    phase = rng.uniform(0, 2 * np.pi, (n, n))
    region = np.zeros(system.prediction_grid(2).shape, np.float32)
    region[100:140, 100:140] = 1.0
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pred = predict_retina(phase, system, oversample=2, signal_region=region)
    acc = pred.account
    assert acc.total_mw() == pytest.approx(7.5, rel=1e-3)
    for name in ("pixel_gaps_mw", "higher_orders_mw", "ocular_absorbed_mw", "zero_order_mw"):
        assert getattr(acc, name) >= -1e-9
    assert 0 < acc.signal_mw < acc.field_mw
    # the map holds exactly the light that the account puts on the retina
    assert float(pred.sample_power_mw.sum(dtype=np.float64)) == pytest.approx(
        acc.retina_mw, rel=1e-4
    )


def test_zero_order_spot_is_the_focused_beam():
    # Source: Goodman, 3rd ed., §5.2: the unmodulated beam focuses to the Fourier
    # transform of its amplitude at the optical axis (common practice for SLM zero order).
    n = 128
    system = make_system(n, zero_order_fraction=0.1, fill_factor=1.0)
    phase = np.zeros((n, n))
    pred = predict_retina(phase, system, oversample=2)
    assert pred.account.zero_order_mw == pytest.approx(0.1 * pred.account.retina_mw, rel=1e-3)
    r0, c0 = pred.grid.centre_index
    assert np.unravel_index(np.argmax(pred.irradiance_mw_per_mm2), pred.grid.shape) == (r0, c0)


def test_neighbouring_orders_match_the_direct_far_field(rng):
    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §4.2.2, eq. (4-28): the far
    # field of a pixelated aperture is |sum c_n exp(-2 pi i u n p)|^2 sinc^2(a u), evaluated
    # here directly (no FFT) at points beyond the predicted order.
    from stimplan.holography.propagation import with_higher_orders

    n, ff = 32, 0.7
    system = make_system(n, fill_factor=ff, profile="flat")
    phase = rng.uniform(0, 2 * np.pi, (n, n))
    pred = predict_retina(phase, system, oversample=2)
    ext, grid = with_higher_orders(pred.irradiance_mw_per_mm2, pred.grid, ff, 64)
    assert grid.shape == (2 * n + 128, 2 * n + 128)
    c = system.illumination.amplitude(system.slm).astype(np.float64) * np.exp(1j * phase)
    pos = np.arange(n) - n / 2 + 0.5
    s_n = 2 * n
    centre = grid.rows // 2
    for r, col in [(0, 0), (5, 100), (centre, centre), (centre + 70, centre - 3), (191, 40)]:
        uy, ux = (r - centre) / s_n, (col - centre) / s_n  # in units of 1/pitch
        field = np.exp(-2j * np.pi * uy * pos) @ c @ np.exp(-2j * np.pi * ux * pos) / s_n
        env = (np.sinc(math.sqrt(ff) * uy) * np.sinc(math.sqrt(ff) * ux)) ** 2
        direct = abs(field) ** 2 * ff**2 * env / grid.sample_area_mm2
        assert ext[r, col] == pytest.approx(direct, rel=1e-4)


@pytest.mark.parametrize(("rows", "cols"), [(3, -5), (0, 7), (-11, 0)])
def test_added_phase_ramp_moves_the_far_field_by_whole_samples(rows, cols):
    # Source: Fourier shift theorem (Goodman, 3rd ed., §2.1.3): exp(2πi(c x/N + r y/N))
    # moves the centred DFT by (r, c) samples; a flat field becomes a delta there.
    from stimplan.holography import add_phase_ramp, linear_phase_ramp

    n = 64
    phase = add_phase_ramp(np.zeros((n, n), np.float32), rows, cols)
    assert phase.dtype == np.float32 and phase.min() >= 0 and phase.max() < 2 * np.pi
    power = np.abs(far_field(np.exp(1j * phase.astype(np.float64)))) ** 2
    peak = np.unravel_index(int(np.argmax(power)), power.shape)
    assert peak == (n // 2 + rows, n // 2 + cols)
    assert power[peak] == pytest.approx(power.sum(), rel=1e-6)
    # the fused form equals the wrapped sum of a phase and the documented ramp
    rng = np.random.default_rng(3)
    base = rng.uniform(0, 2 * np.pi, (n, n + 3)).astype(np.float32)
    got = add_phase_ramp(base, rows + 0.37, cols - 0.61)
    want = np.mod(base + linear_phase_ramp(base.shape, rows + 0.37, cols - 0.61), 2 * np.pi)
    d = np.abs(got - want)
    assert float(np.minimum(d, 2 * np.pi - d).max()) < 1e-5


def test_quantised_levels_are_the_nearest_staircase_step():
    # Source: Swanson (1989), §2: L levels 2πk/L; the nearest level is round(φ L / 2π) mod L.
    rng = np.random.default_rng(5)
    phase = rng.uniform(-20.0, 20.0, (200, 300)).astype(np.float32)
    for levels in (2, 256, 1024):
        k = quantize_phase(phase, levels).astype(np.int64)
        step = 2 * np.pi / levels
        err = np.angle(np.exp(1j * (phase.astype(np.float64) - k * step)))
        assert float(np.abs(err).max()) <= step / 2 + 1e-5
        assert k.min() >= 0 and k.max() < levels
