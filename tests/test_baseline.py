"""The amplitude-mask baseline against the closed-form irradiance of a mask projector."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.baseline import MASK_PRESETS, AmplitudeMask, project_mask
from stimplan.grid import RetinalGrid
from stimplan.holography import IftaSettings, design_hologram
from stimplan.metrics import pattern_metrics
from stimplan.optics.target import Target

from .conftest import make_system


def test_mask_irradiance_is_power_times_transmission_over_area():
    # Source: den Boer, Active Matrix Liquid Crystal Displays (2005), §6.1: the panel
    # passes its total transmission T of the light spread over its image, so
    # E_lit = P T tau / A_field and E_dark = E_lit / CR.
    grid = RetinalGrid((100, 100), 2.0, 2.0)
    stim = np.zeros(grid.shape, np.float32)
    stim[40:60, 40:60] = 1.0
    mask = AmplitudeMask("lcd", efficiency=0.07, contrast_ratio=500.0)
    mp = project_mask(stim, grid, mask, power_mw=10.0, eye_transmission=0.8)
    area_mm2 = grid.width_um * grid.height_um * 1e-6
    e_lit = 10.0 * 0.07 * 0.8 / area_mm2
    assert mp.irradiance_mw_per_mm2[50, 50] == pytest.approx(e_lit, rel=1e-5)
    assert mp.irradiance_mw_per_mm2[0, 0] == pytest.approx(e_lit / 500.0, rel=1e-4)


@pytest.mark.parametrize("width_um", [40.0, 41.0, 45.0])
def test_a_small_field_is_exactly_its_area(width_um):
    # The same closed form for a field smaller than the grid whose edges fall on sample
    # centres (40 µm on 10 µm samples) or between them: E_lit = P T tau / (w h), and the
    # power on the retina is P T tau. (A field counted by sample centres came out one
    # sample too wide, 9 % dim.)
    # Source: den Boer, Active Matrix Liquid Crystal Displays (2005), §6.1.
    grid = RetinalGrid((20, 20), 10.0, 10.0)
    stim = np.ones(grid.shape, np.float32)
    mask = AmplitudeMask(
        "lcd",
        efficiency=0.07,
        contrast_ratio=500.0,
        field_width_um=width_um,
        field_height_um=width_um,
    )
    mp = project_mask(stim, grid, mask, power_mw=10.0, eye_transmission=0.8)
    e_lit = 10.0 * 0.07 * 0.8 / (width_um * width_um * 1e-6)
    centre = grid.rows // 2, grid.cols // 2
    assert mp.irradiance_mw_per_mm2[centre] == pytest.approx(e_lit, rel=1e-5)
    total = float(mp.irradiance_mw_per_mm2.sum(dtype=np.float64)) * grid.sample_area_mm2
    assert total == pytest.approx(10.0 * 0.07 * 0.8, rel=1e-5)
    assert mp.field_area_mm2 == pytest.approx(width_um * width_um * 1e-6, rel=1e-6)


def test_hologram_gain_follows_area_ratio():
    # Source: REFERENCES [der]: gain = (eta_holo / T_mask) x (A_field / A_lit); the
    # measured gain must match that formula with the measured hologram efficiency.
    system = make_system(128, fill_factor=0.95, transmission=0.8)
    grid = system.design_grid()
    x, y = grid.coords_um()
    lit = (np.abs(x - 25 * grid.pitch_x_um) < 6 * grid.pitch_x_um) & (
        np.abs(y) < 6 * grid.pitch_y_um
    )
    target = Target.from_intensity(lit.astype(np.float32), grid)
    h = design_hologram(target, system, IftaSettings(method="mraf", iterations=40))
    pred = h.predict(system)
    m = pattern_metrics(pred, h.target)
    pg = pred.grid
    mask = MASK_PRESETS["lcd"]
    mp = project_mask(h.target.intensity_on(pg), pg, mask, pred.power_mw, eye_transmission=0.8)
    region = h.target.region_on(pg, "lit")
    e_mask = float(np.mean(mp.irradiance_mw_per_mm2[region >= 0.999]))  # fully lit samples
    gain = m.mean_lit_irradiance_mw_per_mm2 / e_mask
    a_field = pg.width_um * pg.height_um
    a_lit = float(region.sum()) * pg.sample_area_um2
    # eta_holo already includes the eye's transmission, the mask figure too (tau cancels)
    expected = (m.efficiency / (mask.efficiency * 0.8)) * (a_field / a_lit)
    assert gain == pytest.approx(expected, rel=0.01)
    assert gain > 10


def test_mask_rejects_bad_values():
    from stimplan.errors import ConfigError

    with pytest.raises(ConfigError, match="mask.efficiency"):
        AmplitudeMask(efficiency=1.5)
    with pytest.raises(ConfigError, match="mask.contrast_ratio"):
        AmplitudeMask(contrast_ratio=0.5)


def test_mask_presets_match_their_published_figures():
    # Sources: den Boer, Active Matrix Liquid Crystal Displays (2005), §6.1.1 (colour
    # AMLCD: total transmittance 5-10 %, aperture ratio 40-70 %); Opt. Express 16, 1669
    # (2008) (LCoS fill factor over 90 %); Popoff et al., arXiv:2311.17496 (2023) (DMD
    # fill factor about 88-92 %).
    from stimplan.baseline import MASK_PRESET_INFO

    lcd, lcos, dmd = (MASK_PRESET_INFO[k] for k in ("lcd", "lcos", "dmd"))
    assert 0.05 <= lcd.mask.efficiency <= 0.10 and 0.40 <= lcd.fill_factor <= 0.70
    assert lcos.fill_factor >= 0.9 and lcos.mask.efficiency >= 0.6
    assert 0.88 <= dmd.fill_factor <= 0.92
    for p in (lcd, lcos, dmd):
        # the fill factor is part of the efficiency: no panel passes more than its open area
        assert p.mask.efficiency <= p.fill_factor
        assert set(p.sources) == {"efficiency", "fill_factor", "contrast_ratio"}
