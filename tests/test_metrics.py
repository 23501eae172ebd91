"""Pattern figures of merit against their textbook definitions, written the plain way."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.metrics import pattern_metrics, rms_error

from .conftest import make_system


def test_pattern_metrics_follow_their_definitions(rng):
    # Source: Goodman, Speckle Phenomena in Optics (2007), §3.1 (C = σ/<I>);
    # Di Leonardo et al., Opt. Express 15, 1913 (2007), eq. (6) (efficiency);
    # Fienup, Appl. Opt. 21, 2758 (1982) (normalised RMS error after the best scale).
    from stimplan.holography import design_hologram
    from stimplan.holography.ifta import IftaSettings
    from stimplan.optics.target import Target

    system = make_system(64)
    grid = system.design_grid()
    img = np.zeros(grid.shape, np.float32)
    img[20:44, 24:40] = 1.0
    holo = design_hologram(
        Target.from_intensity(img, grid), system, IftaSettings(method="gs", iterations=5)
    )
    pred = holo.predict(system)
    lit = holo.target.region_on(pred.grid, "lit")
    got = pattern_metrics(pred, holo.target, lit=lit)

    irr = pred.irradiance_mw_per_mm2.astype(np.float64)
    inside = lit >= 0.999
    assert got.speckle_contrast == pytest.approx(irr[inside].std() / irr[inside].mean(), rel=1e-9)
    eff = float(np.sum(pred.sample_power_mw.astype(np.float64) * lit)) / pred.power_mw
    assert got.efficiency == pytest.approx(eff, rel=1e-6)
    mean_lit = float(np.sum(irr * lit) / np.sum(lit))
    assert got.mean_lit_irradiance_mw_per_mm2 == pytest.approx(mean_lit, rel=1e-6)


def test_rms_error_after_the_best_scale(rng):
    # Source: Fienup (1982): k = Σ w I T / Σ w I², error = sqrt(Σ w (k I − T)² / Σ w) / <T>.
    i = rng.uniform(0.0, 2.0, (50, 70)).astype(np.float32)
    t = rng.uniform(0.0, 1.0, (50, 70)).astype(np.float32)
    w = (rng.uniform(0.0, 1.0, (50, 70)) > 0.3).astype(np.float32)
    i64, t64, w64 = (a.astype(np.float64) for a in (i, t, w))
    k = np.sum(w64 * i64 * t64) / np.sum(w64 * i64 * i64)
    mean_t = np.sum(w64 * t64) / np.sum(w64)
    want = np.sqrt(np.sum(w64 * (k * i64 - t64) ** 2) / np.sum(w64)) / mean_t
    assert rms_error(i, t, w) == pytest.approx(want, rel=1e-10)
    assert rms_error(3.0 * t, t, w) == pytest.approx(0.0, abs=1e-6)  # a scaled copy: no error


def test_error_region_is_the_cross_dilation_twice(rng):
    # Source: scipy.ndimage.binary_dilation with its default cross structure, iterated twice.
    from scipy import ndimage

    from stimplan.metrics import _dilate_l1

    mask = rng.uniform(0.0, 1.0, (60, 75)) > 0.97
    mask[0, 0] = mask[-1, -1] = True  # edges
    want = ndimage.binary_dilation(mask, iterations=2)
    np.testing.assert_array_equal(_dilate_l1(mask, 2) > 0, want)
