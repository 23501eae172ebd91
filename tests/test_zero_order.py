"""The zero order coherent with the signal, and the exposure maps raised above the mean."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from stimplan.holography.propagation import predict_retina, zero_order_irradiance
from stimplan.holography.zero_order import coherent_zero_order_bound
from stimplan.plan import plan_sequence
from stimplan.plan.wiring import exposure_map_notes, exposure_maps
from stimplan.sequence import load_sequence

from .conftest import make_system
from .scenarios import gui_sequence


def test_the_worst_phase_is_the_two_beam_maximum():
    # Source: Born & Wolf, Principles of Optics, 7th ed., §7.2 (section from memory): two
    # coherent beams give I1 + I2 + 2 sqrt(I1 I2) cos δ, at most (sqrt(I1) + sqrt(I2))².
    rng = np.random.default_rng(2)
    a = rng.uniform(0, 5, (64, 64)).astype(np.float32)
    b = rng.uniform(0, 2, (64, 64)).astype(np.float32)
    total = (a + b).astype(np.float32)
    a64, b64 = a.astype(np.float64), b.astype(np.float64)
    full = coherent_zero_order_bound(total, b, 1.0).astype(np.float64)
    peak = (np.sqrt(a64) + np.sqrt(b64)) ** 2
    t64 = total.astype(np.float64)
    assert np.all(full >= peak * (1 - 1e-7))
    # no higher than the maximum with the modulated part raised by float32 round-off
    assert np.all(full <= (np.sqrt(a64 + 1e-6 * t64) + np.sqrt(b64)) ** 2 * (1 + 1e-6))
    # a quarter of the zero order's power coherent: amplitude sqrt(b / 4) interferes
    quarter = coherent_zero_order_bound(total, b, 0.25).astype(np.float64)
    assert np.all(quarter >= (a64 + b64 + 2 * np.sqrt(a64 * b64 / 4)) * (1 - 1e-7))
    assert np.all(quarter <= (a64 + b64 + 2 * np.sqrt((a64 + 1e-6 * t64) * b64 / 4)) * (1 + 1e-6))
    np.testing.assert_array_equal(coherent_zero_order_bound(total, b, 0.0), total)


def test_the_zero_order_map_is_the_predictions_unmodulated_part():
    # Source: linearity of the far field in power (Goodman, Introduction to Fourier Optics,
    # 3rd ed., §4.2): with a fraction z unmodulated, the map is (1 - z) times the map of the
    # fully modulated SLM plus the unmodulated light's own map.
    base = make_system(64)
    with_zero = dataclasses.replace(
        base, slm=dataclasses.replace(base.slm, zero_order_fraction=0.3)
    )
    rng = np.random.default_rng(4)
    phase = rng.uniform(0, 2 * np.pi, base.slm.shape).astype(np.float32)
    full = predict_retina(phase, with_zero).irradiance_mw_per_mm2.astype(np.float64)
    mod = predict_retina(phase, base).irradiance_mw_per_mm2.astype(np.float64) * 0.7
    zero = zero_order_irradiance(with_zero).astype(np.float64)
    np.testing.assert_allclose(full, mod + zero, rtol=1e-4, atol=1e-6 * full.max())
    assert zero_order_irradiance(base) is None
    # common practice: the unmodulated, unlensed beam focuses on the optical axis
    assert np.unravel_index(np.argmax(zero), zero.shape) == (64, 64)


def _spec(tmp_path, slm_extra="", laser_extra=""):
    text = gui_sequence(power=0.5)
    text = text.replace("phase_levels = 256\n", "phase_levels = 256\n" + slm_extra, 1)
    text = text.replace('profile = "gaussian"\n', 'profile = "gaussian"\n' + laser_extra, 1)
    p = tmp_path / "z.toml"
    p.write_text(text)
    return load_sequence(p)


def test_the_exposure_map_takes_the_coherent_zero_order_at_its_worst_phase(tmp_path):
    # Source: Born & Wolf (1999), §7.2 (from memory), as above; the modulated part is
    # (1 - z) times the map of the fully modulated SLM (linearity, Goodman §4.2).
    z, s = 0.05, 0.2
    spec = _spec(tmp_path, f"zero_order_fraction = {z}\nzero_order_incoherent_share = {s}\n")
    ref = dataclasses.replace(
        spec.system, illumination=dataclasses.replace(spec.system.illumination, power_mw=1.0)
    )
    no_zero = dataclasses.replace(ref, slm=dataclasses.replace(ref.slm, zero_order_fraction=0.0))
    with plan_sequence(spec, progress=False) as plan:
        sp = plan.holograms[0]
        got = exposure_maps(spec)(sp).astype(np.float64)
        mod = sp.hologram.predict(no_zero, oversample=spec.oversample).irradiance_mw_per_mm2
        mod = mod.astype(np.float64) * (1 - z)
        zero = zero_order_irradiance(ref, oversample=spec.oversample).astype(np.float64)
        shown = sp.prediction.irradiance_mw_per_mm2.astype(np.float64)
    c = 1 - s  # polarised, aligned light: all of the zero order is in the modulated polarisation
    expect = mod + zero + 2 * np.sqrt(c * mod * zero)
    big = expect > 1e-3 * expect.max()
    np.testing.assert_allclose(got[big], expect[big], rtol=1e-3)
    assert got.max() >= expect.max() * (1 - 1e-4)
    assert got.sum() > shown.sum()  # above the mean the map shows
    assert any("worst phase" in n for n in exposure_map_notes(spec))


def test_the_exposure_map_leaves_the_source_blur_out(tmp_path):
    # a multimode source's blur only spreads the light (its kernel sums to 1), so the
    # exposure uses the single-mode map of the same power: the prediction with M² = 1
    spec = _spec(tmp_path, laser_extra="m_squared = 3.0\n")
    ref = dataclasses.replace(
        spec.system,
        illumination=dataclasses.replace(spec.system.illumination, power_mw=1.0, m_squared=1.0),
    )
    with plan_sequence(spec, progress=False) as plan:
        sp = plan.holograms[0]
        got = exposure_maps(spec)(sp)
        single = sp.hologram.predict(ref, oversample=spec.oversample).irradiance_mw_per_mm2
        shown = sp.prediction.irradiance_mw_per_mm2
    np.testing.assert_allclose(got, single, rtol=1e-5, atol=1e-6 * float(single.max()))
    assert float(shown.max()) < float(single.max())  # the blur lowers the peak shown
    assert any("blur is left out" in n for n in exposure_map_notes(spec))


def test_a_bad_incoherent_share_names_its_key(tmp_path):
    with pytest.raises(Exception, match=r"zero_order_incoherent_share"):
        _spec(tmp_path, "zero_order_incoherent_share = 1.5\n")
